import { readFileSync, readdirSync } from 'node:fs';
import { dirname, join, relative, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';

// The import graph of src/, read from the files themselves, held to the direction DEVELOPERS.md
// documents (core <- services <- edges): a file may import from its own unit or from a unit on a
// lower layer, never from a peer or from above, and no files may import each other in a circle.

const SRC = fileURLToPath(new URL('../src/', import.meta.url));

/** Units of src/ (a folder or a top-level file) by layer, lowest first. */
export const LAYERS: ReadonlyArray<readonly string[]> = [
  ['core'],
  ['contracts', 'config', 'errors.ts', 'ids.ts', 'version.ts', 'cursor.ts', 'worker-boot.ts', 'metrics.ts', 'auth'],
  ['io'],
  ['bundle', 'store'],
  ['scoring', 'reports', 'alerts'],
  ['jobs', 'demo'],
  ['runtime.ts'],
  ['http'],
  ['cli'],
];

function sourceFiles(dir: string): string[] {
  return readdirSync(dir, { withFileTypes: true }).flatMap((e) => (e.isDirectory() ? sourceFiles(join(dir, e.name)) : e.name.endsWith('.ts') ? [join(dir, e.name)] : []));
}

/** Relative module specifiers of a file's static imports and re-exports (type-only ones too). */
function importsOf(text: string): string[] {
  const found: string[] = [];
  for (const m of text.matchAll(/^\s*(?:import|export)\b[^'"`;]*?\bfrom\s+'(\.[^']+)'/gm)) found.push(m[1] as string);
  for (const m of text.matchAll(/^\s*import\s+'(\.[^']+)'/gm)) found.push(m[1] as string);
  return found;
}

export function importGraph(): Map<string, string[]> {
  const graph = new Map<string, string[]>();
  for (const file of sourceFiles(SRC)) {
    const from = relative(SRC, file);
    const targets = importsOf(readFileSync(file, 'utf8')).map((spec) => relative(SRC, resolve(dirname(file), spec.replace(/\.js$/, '.ts'))));
    graph.set(from, targets);
  }
  return graph;
}

const unitOf = (file: string): string => file.split('/')[0] as string;
const layerOf = (unit: string): number => LAYERS.findIndex((units) => units.includes(unit));

/** Strongly connected components of more than one file (Tarjan 1972). */
function circles(graph: Map<string, string[]>): string[][] {
  let index = 0;
  const idx = new Map<string, number>();
  const low = new Map<string, number>();
  const stack: string[] = [];
  const onStack = new Set<string>();
  const out: string[][] = [];
  const visit = (v: string): void => {
    idx.set(v, index);
    low.set(v, index);
    index++;
    stack.push(v);
    onStack.add(v);
    for (const w of graph.get(v) ?? []) {
      if (!graph.has(w)) continue;
      if (!idx.has(w)) {
        visit(w);
        low.set(v, Math.min(low.get(v) as number, low.get(w) as number));
      } else if (onStack.has(w)) {
        low.set(v, Math.min(low.get(v) as number, idx.get(w) as number));
      }
    }
    if (low.get(v) === idx.get(v)) {
      const component: string[] = [];
      let w: string;
      do {
        w = stack.pop() as string;
        onStack.delete(w);
        component.push(w);
      } while (w !== v);
      if (component.length > 1) out.push(component.sort());
    }
  };
  for (const v of graph.keys()) if (!idx.has(v)) visit(v);
  return out;
}

describe('the import graph of src/', () => {
  const graph = importGraph();

  it('is read from every source file, and every import names a file that exists', () => {
    expect(graph.size).toBeGreaterThan(100);
    const missing = [...graph].flatMap(([from, tos]) => tos.filter((to) => !graph.has(to)).map((to) => `${from} -> ${to}`));
    expect(missing).toEqual([]);
  });

  it('places every unit of src/ on a layer', () => {
    const units = [...new Set([...graph.keys()].map(unitOf))].sort();
    expect(units.filter((u) => layerOf(u) < 0)).toEqual([]);
  });

  it('has no circle of files importing each other', () => {
    expect(circles(graph)).toEqual([]);
  });

  it('imports only from the same unit or a lower layer (core <- services <- edges)', () => {
    const against = [...graph].flatMap(([from, tos]) =>
      tos
        .filter((to) => unitOf(to) !== unitOf(from) && layerOf(unitOf(to)) >= layerOf(unitOf(from)))
        .map((to) => `${from} -> ${to} (layer ${layerOf(unitOf(from))} -> ${layerOf(unitOf(to))})`),
    );
    expect(against).toEqual([]);
  });

  it('would catch a circle and a back edge: the checks fail on a graph that has them', () => {
    const bad = new Map([
      ['core/a.ts', ['http/app.ts']],
      ['http/app.ts', ['core/a.ts']],
    ]);
    expect(circles(bad)).toEqual([['core/a.ts', 'http/app.ts']]);
    expect(layerOf('core')).toBeLessThan(layerOf('http'));
  });
});
