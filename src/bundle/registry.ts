import { readdir } from 'node:fs/promises';
import { join } from 'node:path';
import { type Scorer, createScorer } from './scorer.js';
import { BundleError, type LoadedBundle, readBundle } from './verify.js';

export interface ModelEntry {
  name: string;
  bundle: LoadedBundle;
  scorer: Scorer;
  /** The file it came from. */
  path: string;
  loadedAt: Date;
}

export class RegistryError extends Error {
  constructor(
    readonly dir: string,
    readonly problems: string[],
  ) {
    super(`models in ${dir} refused:\n${problems.map((p) => `  ${p}`).join('\n')}`);
    this.name = 'RegistryError';
  }
}

export const BUNDLE_SUFFIX = '.bundle.json';

/**
 * Reads and verifies every *.bundle.json in dir. All-or-nothing: any bad bundle, or two bundles
 * with one name, fails the whole set with every problem listed.
 */
export async function loadModelDirectory(dir: string, now: () => Date = () => new Date()): Promise<Map<string, ModelEntry>> {
  let files: string[];
  try {
    files = (await readdir(dir)).filter((f) => f.endsWith(BUNDLE_SUFFIX)).sort();
  } catch (err) {
    throw new RegistryError(dir, [`the directory cannot be read (${(err as NodeJS.ErrnoException).code ?? (err as Error).message})`]);
  }
  const problems: string[] = [];
  const entries = new Map<string, ModelEntry>();
  for (const file of files) {
    const path = join(dir, file);
    try {
      const bundle = await readBundle(path);
      const name = bundle.file.name;
      const twin = entries.get(name);
      if (twin) {
        problems.push(`two bundles are named ${JSON.stringify(name)}: ${twin.path} and ${path}`);
        continue;
      }
      entries.set(name, { name, bundle, scorer: createScorer(bundle), path, loadedAt: now() });
    } catch (err) {
      if (!(err instanceof BundleError)) throw err;
      problems.push(err.message);
    }
  }
  if (problems.length > 0) throw new RegistryError(dir, problems);
  return entries;
}

export interface ModelRegistry {
  readonly dir: string;
  get(name: string): ModelEntry | undefined;
  list(): ModelEntry[];
  /**
   * Loads the directory again and swaps the whole set in one step; when anything fails, the
   * set being served stays as it was and the error is thrown for the caller to log.
   */
  reload(): Promise<ModelEntry[]>;
}

export async function createModelRegistry(dir: string, onLoaded: (e: ModelEntry) => void = () => undefined): Promise<ModelRegistry> {
  let current = await loadModelDirectory(dir);
  for (const e of current.values()) onLoaded(e);
  return {
    dir,
    get: (name) => current.get(name),
    list: () => [...current.values()],
    async reload() {
      const next = await loadModelDirectory(dir);
      // Keep the first load time of a bundle that did not change.
      for (const [name, e] of next) {
        const old = current.get(name);
        if (old && old.bundle.file.sha256 === e.bundle.file.sha256) next.set(name, old);
        else onLoaded(e);
      }
      current = next;
      return [...current.values()];
    },
  };
}
