import { copyFileSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { RegistryError, createModelRegistry, loadModelDirectory } from '../../src/bundle/registry.js';
import { serializeBundle, writeBundle } from '../../src/bundle/write.js';
import { irisBundle } from '../helpers/bundles.js';
import { tempDir } from '../helpers/datasets.js';

const v1 = irisBundle().bundle;
const v2 = irisBundle({ version: '2', seed: 5 }).bundle;
let tmp = tempDir();
afterEach(() => {
  tmp.remove();
  tmp = tempDir();
});

describe('models directory', () => {
  it('loads and verifies every *.bundle.json, ignoring other files', async () => {
    await writeBundle(tmp.file('iris.bundle.json'), v1);
    tmp.file('notes.txt', 'not a bundle');
    const models = await loadModelDirectory(tmp.dir);
    expect([...models.keys()]).toEqual(['iris']);
    expect(models.get('iris')?.bundle.file.sha256).toBe(v1.sha256);
  });

  it('refuses two bundles with one name, naming both files', async () => {
    await writeBundle(tmp.file('a.bundle.json'), v1);
    await writeBundle(tmp.file('b.bundle.json'), v2);
    await expect(loadModelDirectory(tmp.dir)).rejects.toThrow(RegistryError);
    await expect(loadModelDirectory(tmp.dir)).rejects.toThrow(`two bundles are named "iris": ${join(tmp.dir, 'a.bundle.json')} and ${join(tmp.dir, 'b.bundle.json')}`);
  });

  it('refuses a directory that cannot be read', async () => {
    await expect(loadModelDirectory(join(tmp.dir, 'missing'))).rejects.toThrow(/the directory cannot be read \(ENOENT\)/);
  });

  it('reloads atomically: a bad bundle leaves the old set serving, a good one replaces it', async () => {
    const path = tmp.file('iris.bundle.json');
    await writeBundle(path, v1);
    const registry = await createModelRegistry(tmp.dir);
    const first = registry.get('iris');

    writeFileSync(tmp.file('broken.bundle.json'), serializeBundle(v2).replace('"version": "2"', '"version": "3"'));
    await expect(registry.reload()).rejects.toThrow(/broken\.bundle\.json refused: sha256/);
    expect(registry.get('iris')).toBe(first);
    expect(registry.list()).toHaveLength(1);

    rmSync(tmp.file('broken.bundle.json'));
    await writeBundle(path, v2);
    await registry.reload();
    expect(registry.get('iris')?.bundle.file.version).toBe('2');
  });

  it('keeps the load time of a bundle that did not change across a reload', async () => {
    await writeBundle(tmp.file('iris.bundle.json'), v1);
    const seen: string[] = [];
    const registry = await createModelRegistry(tmp.dir, (e) => seen.push(e.bundle.file.sha256));
    const loadedAt = registry.get('iris')?.loadedAt;
    copyFileSync(tmp.file('iris.bundle.json'), tmp.file('iris.bundle.json'));
    await registry.reload();
    expect(registry.get('iris')?.loadedAt).toBe(loadedAt);
    expect(seen).toEqual([v1.sha256]);
  });
});
