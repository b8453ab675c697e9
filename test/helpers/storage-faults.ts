import { execFileSync } from 'node:child_process';
import { closeSync, mkdtempSync, openSync, rmSync, writeFileSync, writeSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

// Storage that fails, for the tests of what the service does then: a small tmpfs that fills up,
// files made immutable. Each needs a capability (root, mount, chattr on the file system); where
// the machine does not give it, the helper says why in one line and the test skips with it.

function run(cmd: string, args: string[]): string | null {
  try {
    execFileSync(cmd, args, { stdio: ['ignore', 'ignore', 'pipe'] });
    return null;
  } catch (err) {
    const stderr = (err as { stderr?: Buffer }).stderr?.toString().trim();
    return `${cmd} ${args.join(' ')}: ${stderr || (err as Error).message}`.split('\n')[0] as string;
  }
}

/** Why files in `dir` cannot be made immutable here (chattr +i), or null when they can. */
export function immutableUnsupported(dir: string = tmpdir()): string | null {
  const probe = join(dir, `.chattr-probe-${process.pid}`);
  writeFileSync(probe, '');
  try {
    const why = run('chattr', ['+i', probe]);
    if (why !== null) return `cannot make files immutable here (${why})`;
    run('chattr', ['-i', probe]);
    return null;
  } finally {
    run('chattr', ['-i', probe]);
    rmSync(probe, { force: true });
  }
}

export function setImmutable(paths: string[], on: boolean): void {
  for (const p of paths) {
    const why = run('chattr', [on ? '+i' : '-i', p]);
    if (why !== null && on) throw new Error(why);
  }
}

export interface SmallDisk {
  dir: string;
  /** Fills the file system to the last byte with a file of its own. */
  fill(): void;
  /** Removes that file. */
  free(): void;
  remove(): void;
}

/** A tmpfs of `bytes` mounted on a fresh directory, or why one cannot be mounted here. */
export function mountSmallDisk(bytes: number): SmallDisk | string {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-tmpfs-'));
  const why = run('mount', ['-t', 'tmpfs', '-o', `size=${bytes},mode=0755`, 'tmpfs', dir]);
  if (why !== null) {
    rmSync(dir, { recursive: true, force: true });
    return `cannot mount a tmpfs here (${why})`;
  }
  const filler = join(dir, 'filler');
  return {
    dir,
    fill() {
      const fd = openSync(filler, 'a');
      const chunk = Buffer.alloc(4096, 0x55);
      try {
        for (;;) writeSync(fd, chunk);
      } catch (err) {
        if ((err as NodeJS.ErrnoException).code !== 'ENOSPC') throw err;
      } finally {
        closeSync(fd);
      }
    },
    free() {
      rmSync(filler, { force: true });
    },
    remove() {
      run('umount', ['-l', dir]);
      rmSync(dir, { recursive: true, force: true });
    },
  };
}
