import { statSync } from 'node:fs';

// Which files the service's connections hold open. SQLite opens the database and its -wal once
// and keeps them open; if either is deleted or replaced underneath (rm, mv, a restore copied over
// it), the connections go on writing to the old inode, which nothing will read after a restart:
// commits that were answered are lost at the next crash, and the chain looks intact (issue 19).
// Comparing the device and inode numbers at each checkpoint catches it.

export interface FileIdentity {
  path: string;
  dev: number;
  ino: number;
}

/** The identity of each file that exists now (the -wal may not exist yet for a new database). */
export function recordIdentity(paths: string[]): FileIdentity[] {
  const out: FileIdentity[] = [];
  for (const path of paths) {
    const s = statSync(path, { throwIfNoEntry: false });
    if (s) out.push({ path, dev: s.dev, ino: s.ino });
  }
  return out;
}

/** What changed since `recorded`, as a sentence; null when every file is still the one opened. */
export function changedIdentity(recorded: FileIdentity[]): string | null {
  for (const r of recorded) {
    const s = statSync(r.path, { throwIfNoEntry: false });
    if (!s) return `${r.path} was removed while the service had it open`;
    if (s.dev !== r.dev || s.ino !== r.ino) return `${r.path} was replaced by another file while the service had it open`;
  }
  return null;
}
