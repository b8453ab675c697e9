import type { Database } from 'better-sqlite3';

export interface ModelRecord {
  sha256: string;
  name: string;
  version: string;
  features: Array<{ name: string; unit: string }>;
  classes: string[];
  /** The sealed bundle file itself, kept for drift reports after the bundle is unloaded. */
  bundle?: string;
}

/**
 * Records a bundle the first time it is loaded, so that logged vectors can always be decoded,
 * and when it was loaded last, so that reports by name use the bundle serving now.
 */
export function recordModel(db: Database, m: ModelRecord, now = Date.now()): void {
  db.prepare(
    `INSERT INTO models (sha256, name, version, features, classes, first_loaded_at, last_loaded_at, bundle)
     VALUES (?, ?, ?, ?, ?, ?, ?, ?)
     ON CONFLICT (sha256) DO UPDATE SET bundle = COALESCE(models.bundle, excluded.bundle), last_loaded_at = excluded.last_loaded_at`,
  ).run(m.sha256, m.name, m.version, JSON.stringify(m.features.map((f) => ({ name: f.name, unit: f.unit }))), JSON.stringify(m.classes), now, now, m.bundle ?? null);
}

/** Looks models up by hash, caching them: a sealed bundle never changes. */
export function createModelCache(db: Database): (sha256: string) => ModelRecord | null {
  const get = db.prepare('SELECT sha256, name, version, features, classes FROM models WHERE sha256 = ?');
  const cache = new Map<string, ModelRecord>();
  return (sha256) => {
    const hit = cache.get(sha256);
    if (hit) return hit;
    const row = get.get(sha256) as { sha256: string; name: string; version: string; features: string; classes: string } | undefined;
    if (!row) return null;
    const record: ModelRecord = { ...row, features: JSON.parse(row.features) as ModelRecord['features'], classes: JSON.parse(row.classes) as string[] };
    cache.set(sha256, record);
    return record;
  };
}
