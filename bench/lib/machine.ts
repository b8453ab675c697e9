import { execFileSync } from 'node:child_process';
import { cpus, freemem, platform, release, totalmem } from 'node:os';

export interface Machine {
  cpu: string;
  cores: number;
  memoryGb: number;
  os: string;
  node: string;
  commit: string;
  dirty: boolean;
  date: string;
}

/** What the figures were measured on, for RESULTS.md. */
export function describeMachine(): Machine {
  const git = (...args: string[]): string => {
    try {
      return execFileSync('git', args, { encoding: 'utf8' }).trim();
    } catch {
      return '';
    }
  };
  return {
    cpu: cpus()[0]?.model.trim() ?? 'unknown',
    cores: cpus().length,
    memoryGb: Math.round((totalmem() / 2 ** 30) * 10) / 10,
    os: `${platform()} ${release()}`,
    node: process.version,
    commit: git('rev-parse', '--short', 'HEAD') || 'unknown',
    dirty: git('status', '--porcelain', '--untracked-files=no') !== '',
    date: new Date().toISOString().slice(0, 16).replace('T', ' ') + ' UTC',
  };
}

export const freeMemoryGb = (): number => Math.round((freemem() / 2 ** 30) * 10) / 10;
