import { afterAll, describe, expect, it } from 'vitest';
import { openDatabase } from '../../src/store/database.js';
import { createDriftStore } from '../../src/store/drift-store.js';
import { recordModel } from '../../src/store/models-table.js';
import { tempDir } from '../helpers/datasets.js';

const tmp = tempDir();
afterAll(() => tmp.remove());

const bundle = (version: string) => ({ sha256: version.repeat(64).slice(0, 64), name: 'press-4', version, features: [{ name: 'a', unit: 'mm' }], classes: ['ok', 'bad'], bundle: `{"version":"${version}"}` });

describe('models table', () => {
  it('reports by name on the bundle loaded last, also after a rollback to an older version', () => {
    const db = openDatabase(tmp.file('models.db'), { sync: 'normal' });
    const drift = createDriftStore(db);
    recordModel(db, bundle('1'), 1_000);
    expect(drift.bundleText('press-4')?.sha256).toBe(bundle('1').sha256);
    recordModel(db, bundle('2'), 2_000);
    expect(drift.bundleText('press-4')?.sha256).toBe(bundle('2').sha256);
    // version 2 misbehaves and version 1 goes back into the models directory
    recordModel(db, bundle('1'), 3_000);
    expect(drift.bundleText('press-4')).toEqual({ sha256: bundle('1').sha256, text: '{"version":"1"}' });
    expect(db.prepare('SELECT version, first_loaded_at, last_loaded_at FROM models ORDER BY version').all()).toEqual([
      { version: '1', first_loaded_at: 1_000, last_loaded_at: 3_000 },
      { version: '2', first_loaded_at: 2_000, last_loaded_at: 2_000 },
    ]);
    expect(drift.bundleText('press-9')).toBeNull();
    db.close();
  });
});
