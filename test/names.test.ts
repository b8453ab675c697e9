import { readFileSync } from 'node:fs';
import type { Command } from 'commander';
import type { z } from 'zod';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ALERT_PHASES } from '../src/alerts/runtime.js';
import { BUNDLE_FORMATS } from '../src/bundle/schema.js';
import { buildProgram } from '../src/cli/program.js';
import { configSchema } from '../src/config/config.js';
import { DETECTORS } from '../src/core/domain/detectors.js';
import { PROBLEMS } from '../src/errors.js';
import { createMetrics } from '../src/metrics.js';
import { type TestService, startTestService } from './helpers/service.js';

// Every name a client, a scraper, a script or a configuration file depends on, read from the
// running objects (the app, the commander program, the zod schema, the metrics registry), never
// by reading source files, so that moving code around does not matter and renaming does.
// docs/names.md is the committed list: a rename must change it, and so shows in review.

const NAMES_MD = readFileSync(new URL('../docs/names.md', import.meta.url), 'utf8');

/** The first code span of each list item ("- `x`") under a heading, by heading text. */
function documented(heading: string): string[] {
  const lines = NAMES_MD.split('\n');
  const start = lines.findIndex((l) => /^#{2,3} /.test(l) && l.replace(/^#+ /, '') === heading);
  if (start < 0) throw new Error(`docs/names.md has no heading "${heading}"`);
  const level = /^#+/.exec(lines[start] as string)?.[0].length ?? 2;
  const out: string[] = [];
  for (const line of lines.slice(start + 1)) {
    const h = /^(#+) /.exec(line);
    if (h && (h[1] as string).length <= level) break;
    const item = /^- `([^`]+)`/.exec(line);
    if (item) out.push(item[1] as string);
  }
  return out;
}

/** Sorted differences, so that a failure names what to add to the list and what to remove. */
function compare(what: string, fromCode: readonly string[], fromDoc: readonly string[]): void {
  const code = new Set(fromCode);
  const doc = new Set(fromDoc);
  const diff = {
    'in the code, missing from docs/names.md': [...code].filter((n) => !doc.has(n)).sort(),
    'in docs/names.md, not in the code': [...doc].filter((n) => !code.has(n)).sort(),
    'listed twice in docs/names.md': fromDoc.filter((n, i) => fromDoc.indexOf(n) !== i),
  };
  expect(diff, `${what}: the code and docs/names.md disagree; a rename must change both, deliberately`).toEqual({
    'in the code, missing from docs/names.md': [],
    'in docs/names.md, not in the code': [],
    'listed twice in docs/names.md': [],
  });
}

/**
 * Routes from fastify's own route tree (printRoutes), as "METHOD /path". HEAD, which fastify adds
 * to every GET route, is left out of the list.
 */
function routesOf(tree: string): string[] {
  const stack: string[] = [];
  const out: string[] = [];
  for (const line of tree.split('\n')) {
    const m = /^((?:│ {3}| {4})*)[├└]── (.+?)(?: \(([^)]*)\))?$/.exec(line);
    if (!m) continue;
    const depth = (m[1] as string).length / 4;
    stack.length = depth;
    const path = (stack[depth - 1] ?? '') + (m[2] as string);
    stack[depth] = path;
    for (const method of (m[3] ?? '').split(', ').filter((x) => x !== '' && x !== '-' && x !== 'HEAD')) {
      out.push(`${method} ${path.replace(/:(\w+)/g, '{$1}')}`);
    }
  }
  return out;
}

/** Every command path and its flags, walking the commander program as --help does. */
function commandsOf(cmd: Command, prefix: string): Array<{ command: string; flags: string[] }> {
  return cmd.commands.flatMap((c) => {
    const name = `${prefix} ${c.name()}`;
    const args = c.registeredArguments.map((a) => (a.required ? `<${a.name()}>` : `[${a.name()}]`));
    const self = c.commands.length === 0 ? [{ command: [name, ...args].join(' '), flags: c.options.map((o) => o.flags) }] : [];
    return [...self, ...commandsOf(c, name)];
  });
}

/** Dotted configuration keys: `rules[]` for a list, `<name>` for a map's keys. */
function keysOf(schema: z.ZodType, path: string): string[] {
  const def = schema.def as unknown as { type: string; innerType?: z.ZodType; in?: z.ZodType; shape?: Record<string, z.ZodType>; element?: z.ZodType; valueType?: z.ZodType };
  switch (def.type) {
    case 'default':
    case 'prefault':
    case 'optional':
    case 'nullable':
      return keysOf(def.innerType as z.ZodType, path);
    case 'pipe':
      return keysOf(def.in as z.ZodType, path);
    case 'object':
      return Object.entries(def.shape ?? {}).flatMap(([k, v]) => keysOf(v, path ? `${path}.${k}` : k));
    case 'array': {
      const inner = keysOf(def.element as z.ZodType, `${path}[]`);
      return inner;
    }
    case 'record':
      return keysOf(def.valueType as z.ZodType, `${path}.<name>`);
    default:
      return [path];
  }
}

let svc: TestService;
beforeAll(async () => {
  svc = await startTestService();
});
afterAll(async () => {
  await svc.close();
});

describe('names a client, a script or a scraper depends on, held to docs/names.md', () => {
  it('lists every route of the app as the tests build it, with its method', () => {
    const routes = routesOf(svc.app.printRoutes({ commonPrefix: false }));
    // The tree parser must have read the app: the routes every deployment has are among them.
    expect(routes).toEqual(expect.arrayContaining(['GET /healthz', 'POST /v1/models/{name}/score']));
    compare('routes', routes, documented('Routes'));
  });

  it('lists every command of the plumbline program, with its arguments', () => {
    const commands = commandsOf(buildProgram(), 'plumbline');
    expect(commands.length).toBeGreaterThan(5);
    compare('commands', commands.map((c) => c.command), documented('Commands'));
  });

  it('lists the flags of every command', () => {
    for (const { command, flags } of commandsOf(buildProgram(), 'plumbline')) {
      compare(`flags of ${command}`, flags, documented(command));
    }
  });

  it('lists every configuration key, dotted, down to the fields of alert rules and webhooks', () => {
    const keys = keysOf(configSchema as unknown as z.ZodType, '');
    expect(keys).toContain('alerts.rules[].window');
    compare('configuration keys', keys, documented('Configuration keys'));
  });

  it("lists the service's own Prometheus metrics, with their type and labels", () => {
    const m = createMetrics();
    const own = Object.values(m)
      .filter((x): x is { name: string; labelNames: string[] } & object => typeof x === 'object' && x !== null && 'name' in x && x !== m.registry)
      .map((x) => {
        const type = (m.registry.getSingleMetric(x.name) as unknown as { type: string } | undefined)?.type ?? '?';
        return `${x.name} ${type}${x.labelNames.length > 0 ? ` {${x.labelNames.join(', ')}}` : ''}`;
      });
    expect(own.length).toBeGreaterThan(3);
    compare('metrics', own, documented('Metrics'));
  });

  it('lists the phases of an alert rule with the value of plumbline_alert_state', () => {
    compare('alert phases', Object.entries(ALERT_PHASES).map(([k, v]) => `${v} ${k}`), documented('Alert rule phases'));
  });

  it('lists the states of a stored alert, as GET /v1/alerts takes and answers them', async () => {
    const res = await svc.app.inject({ method: 'GET', url: '/v1/alerts?state=nonsense' });
    // The refusal names the states the route takes: "expected one of "raised"|"cleared"".
    const detail = (res.json() as { errors: Array<{ detail: string }> }).errors[0]?.detail ?? '';
    const states = [...detail.matchAll(/"([a-z_]+)"/g)].map((x) => x[1] as string);
    expect(states.length).toBeGreaterThan(1);
    compare('alert states', states, documented('Alert states'));
  });

  it('lists the bundle formats the loader reads and the domain detectors', () => {
    compare('bundle formats', BUNDLE_FORMATS, documented('Bundle formats'));
    compare('detectors', DETECTORS, documented('Domain detectors'));
  });

  it('lists every problem type a client can receive, with its status', () => {
    compare('problem types', Object.entries(PROBLEMS).map(([code, p]) => `${p.status} ${code}`), documented('Problem types'));
  });
});
