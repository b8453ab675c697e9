import { constants, type Stats } from 'node:fs';
import { lstat, open, realpath } from 'node:fs/promises';
import { join, relative, isAbsolute } from 'node:path';

// Reading a file of the models directory. Anything can be put there under a *.bundle.json name:
// a FIFO (an open for reading waits for a writer for ever, and holds a thread of the pool), a
// link to /dev/zero (read until memory runs out), a link to /etc/passwd (whose first line the
// JSON parser's message used to quote). The rule (docs/models.md): regular files only; a
// symbolic link is followed only to a regular file inside the directory; at most maxBytes.

export class DirectoryFileError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'DirectoryFileError';
  }
}

/** What a file that is not a regular file is, for the message. */
function kind(s: Stats): string {
  if (s.isFIFO()) return 'a FIFO';
  if (s.isDirectory()) return 'a directory';
  if (s.isCharacterDevice()) return 'a character device';
  if (s.isBlockDevice()) return 'a block device';
  if (s.isSocket()) return 'a socket';
  if (s.isSymbolicLink()) return 'a symbolic link';
  return 'not a file';
}

/**
 * Reads `name` in `dir` as UTF-8 text under the rule above; throws DirectoryFileError saying
 * what the file is instead, never what it holds.
 */
export async function readDirectoryFile(dir: string, name: string, maxBytes: number): Promise<string> {
  const path = join(dir, name);
  let target = path;
  const link = await lstat(path);
  if (link.isSymbolicLink()) {
    let resolved: string;
    let base: string;
    try {
      [resolved, base] = await Promise.all([realpath(path), realpath(dir)]);
    } catch (err) {
      throw new DirectoryFileError(`is a symbolic link that leads nowhere (${(err as NodeJS.ErrnoException).code ?? 'unresolved'})`);
    }
    const inside = relative(base, resolved);
    if (inside === '' || inside.startsWith('..') || isAbsolute(inside)) {
      throw new DirectoryFileError(`is a symbolic link to ${resolved}, outside the models directory; only links to regular files inside it are followed`);
    }
    target = resolved;
  } else if (!link.isFile()) {
    throw new DirectoryFileError(`is ${kind(link)}, not a regular file`);
  }
  // O_NONBLOCK: should a FIFO have been swapped in since, the open does not wait for a writer;
  // O_NOFOLLOW: nor is a link swapped in followed. What was opened is checked again below.
  const handle = await open(target, constants.O_RDONLY | constants.O_NOFOLLOW | constants.O_NONBLOCK);
  try {
    const s = await handle.stat();
    if (!s.isFile()) throw new DirectoryFileError(`is ${kind(s)}, not a regular file`);
    if (s.size > maxBytes) throw new DirectoryFileError(`is ${s.size} bytes, more than limits.bundle_bytes (${maxBytes})`);
    // One byte more than the stat said, to see a file that grew meanwhile.
    const buffer = Buffer.alloc(s.size + 1);
    let read = 0;
    for (;;) {
      const { bytesRead } = await handle.read(buffer, read, buffer.length - read, read);
      if (bytesRead === 0) break;
      read += bytesRead;
      if (read === buffer.length) break;
    }
    if (read !== s.size) throw new DirectoryFileError('changed while it was read; reload again once it is written');
    return buffer.toString('utf8', 0, read);
  } finally {
    await handle.close();
  }
}
