import { execFileSync } from 'node:child_process';
import { copyFileSync, mkdirSync, rmSync, symlinkSync, writeFileSync } from 'node:fs';
import { basename, dirname, join } from 'node:path';
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

describe('what the models directory reads (issue 19)', () => {
  const afterCleanup: string[] = [];
  afterEach(() => {
    for (const f of afterCleanup.splice(0)) rmSync(f, { force: true });
  });
  const race = <T>(p: Promise<T>, ms = 10_000) => Promise.race([p.then(() => 'loaded' as const, (err: Error) => err), new Promise<'hung'>((r) => setTimeout(() => r('hung'), ms))]);
  const mkfifo = (path: string): string | null => {
    try {
      execFileSync('mkfifo', [path]);
      return null;
    } catch (err) {
      return (err as Error).message.split('\n')[0] ?? 'mkfifo failed';
    }
  };

  it('refuses a FIFO named *.bundle.json at once, and later reloads work once it is gone', async () => {
    await writeBundle(tmp.file('iris.bundle.json'), v1);
    const registry = await createModelRegistry(tmp.dir);
    const why = mkfifo(tmp.file('x.bundle.json'));
    if (why !== null) return void console.info(`skipped: cannot make a FIFO here (${why})`);
    const first = await race(registry.reload());
    expect(first).toBeInstanceOf(RegistryError);
    expect((first as Error).message).toMatch(/x\.bundle\.json refused: is a FIFO, not a regular file/);
    expect(registry.list().map((e) => e.name)).toEqual(['iris']);
    rmSync(tmp.file('x.bundle.json'));
    expect(await race(registry.reload())).toBe('loaded');
  });

  it('follows a symbolic link only to a regular file inside the directory', async () => {
    mkdirSync(join(tmp.dir, 'versions'));
    await writeBundle(join(tmp.dir, 'versions', 'iris-1.json'), v1);
    symlinkSync(join('versions', 'iris-1.json'), tmp.file('iris.bundle.json'));
    expect([...(await loadModelDirectory(tmp.dir)).keys()]).toEqual(['iris']);
    // a bundle beside the directory, reached by ../
    const outside = join(dirname(tmp.dir), `${basename(tmp.dir)}-elsewhere.json`);
    await writeBundle(outside, v2);
    afterCleanup.push(outside);

    for (const [name, target, said] of [
      ['zero', '/dev/zero', /zero\.bundle\.json refused: is a symbolic link to .*outside the models directory/],
      ['passwd', '/etc/passwd', /passwd\.bundle\.json refused: is a symbolic link to .*outside the models directory/],
      ['up', join('..', `${basename(tmp.dir)}-elsewhere.json`), /up\.bundle\.json refused: is a symbolic link to .*elsewhere\.json, outside the models directory/],
    ] as const) {
      const link = tmp.file(`${name}.bundle.json`);
      symlinkSync(target, link);
      const rss = process.memoryUsage().rss;
      const outcome = await race(loadModelDirectory(tmp.dir));
      expect(outcome).toBeInstanceOf(RegistryError);
      expect((outcome as Error).message).toMatch(said);
      expect((outcome as Error).message).not.toMatch(/root:/);
      // nothing was read: /dev/zero raised RSS by hundreds of MB before
      expect(process.memoryUsage().rss - rss).toBeLessThan(64 * 2 ** 20);
      rmSync(link);
    }
  });

  it('refuses a bundle larger than limits.bundle_bytes without reading it', async () => {
    await writeBundle(tmp.file('iris.bundle.json'), v1);
    const size = serializeBundle(v1).length;
    await expect(loadModelDirectory(tmp.dir, { maxBytes: size - 1 })).rejects.toThrow(new RegExp(`iris\\.bundle\\.json refused: is ${size} bytes, more than limits\\.bundle_bytes \\(${size - 1}\\)`));
    expect([...(await loadModelDirectory(tmp.dir, { maxBytes: size })).keys()]).toEqual(['iris']);
  });

  it('never quotes what a file holds in its error', async () => {
    tmp.file('notes.bundle.json', 'root:x:0:0:root:/root:/bin/bash\nline-3 setter password: hunter2\n');
    tmp.file('half.bundle.json', '{"format": "plumbline-bundle/2", "name": "secret-name-in-file"');
    tmp.file('odd.bundle.json', JSON.stringify({ format: 'root:x:0:0:root' }));
    const err = await loadModelDirectory(tmp.dir).then(() => null, (e: Error) => e);
    expect(err).toBeInstanceOf(RegistryError);
    expect(err!.message).toMatch(/notes\.bundle\.json refused: is not JSON/);
    expect(err!.message).toMatch(/half\.bundle\.json refused: is not JSON/);
    expect(err!.message).toMatch(/odd\.bundle\.json refused: format: is not a bundle format this reader takes/);
    expect(err!.message).not.toMatch(/root:|hunter2|secret-name-in-file/);
  });
});
