import { randomBytes } from 'node:crypto';
import { rename, unlink, writeFile } from 'node:fs/promises';
import { prettyJson } from './canonical-json.js';
import type { AnyBundleFile } from './schema.js';

export function serializeBundle(file: AnyBundleFile): string {
  return `${prettyJson(file)}\n`;
}

/** Writes next to the target, then renames, so a reader never sees half a bundle. */
export async function writeBundle(path: string, file: AnyBundleFile): Promise<void> {
  const tmp = `${path}.${randomBytes(4).toString('hex')}.tmp`;
  try {
    await writeFile(tmp, serializeBundle(file), { encoding: 'utf8', flag: 'wx' });
    await rename(tmp, path);
  } catch (err) {
    await unlink(tmp).catch(() => undefined);
    throw err;
  }
}
