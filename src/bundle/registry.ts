import { readdir } from 'node:fs/promises';
import { join } from 'node:path';
import { DirectoryFileError, readDirectoryFile } from './directory-file.js';
import { type Scorer, createScorer } from './scorer.js';
import { BundleError, type LoadedBundle, parseBundle } from './verify.js';

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

/** limits.bundle_bytes by default: the largest bundle file read. */
export const DEFAULT_BUNDLE_BYTES = 64 * 2 ** 20;

export interface DirectoryOptions {
  now?: () => Date;
  /** limits.bundle_bytes. */
  maxBytes?: number;
}

/**
 * Reads and verifies every *.bundle.json in dir: regular files only, or links to regular files
 * inside dir, of at most maxBytes (directory-file.ts). All-or-nothing: any bad bundle, or two
 * bundles with one name, fails the whole set with every problem listed.
 */
export async function loadModelDirectory(dir: string, options: DirectoryOptions = {}): Promise<Map<string, ModelEntry>> {
  const now = options.now ?? (() => new Date());
  const maxBytes = options.maxBytes ?? DEFAULT_BUNDLE_BYTES;
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
      let text: string;
      try {
        text = await readDirectoryFile(dir, file, maxBytes);
      } catch (err) {
        if (err instanceof DirectoryFileError) throw new BundleError(path, [{ path: '', message: err.message }]);
        throw new BundleError(path, [{ path: '', message: `cannot be read (${(err as NodeJS.ErrnoException).code ?? (err as Error).message})` }]);
      }
      const bundle = parseBundle(text, path);
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

export async function createModelRegistry(dir: string, onLoaded: (e: ModelEntry) => void = () => undefined, options: DirectoryOptions = {}): Promise<ModelRegistry> {
  let current = await loadModelDirectory(dir, options);
  for (const e of current.values()) onLoaded(e);
  return {
    dir,
    get: (name) => current.get(name),
    list: () => [...current.values()],
    async reload() {
      const next = await loadModelDirectory(dir, options);
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
