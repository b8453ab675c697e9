import { spawn } from 'node:child_process';
import { appendFileSync, readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';

// Reading the examples of a doc and holding them to what the code prints now. A doc shows a
// command ("$ ..." in a fenced block) and the output it gave, trimmed with "..." where the doc
// leaves something out. The output is checked piece by piece: every quoted piece must be there,
// in order, and every number the doc quotes must be the number produced. Values that change
// from run to run (ids, times, latencies) match anything; an id the doc shows twice must be the
// same id both times, and is carried into the commands after it.

export const REPO = fileURLToPath(new URL('../../', import.meta.url));
export const CLI_MAIN = fileURLToPath(new URL('../../src/cli/main.ts', import.meta.url));

export function readDoc(path: string): string {
  return readFileSync(new URL(`../../${path}`, import.meta.url), 'utf8');
}

export interface Block {
  lang: string;
  body: string;
  /** 1-based line of the opening fence. */
  line: number;
}

export function fencedBlocks(md: string): Block[] {
  const out: Block[] = [];
  const lines = md.split('\n');
  for (let i = 0; i < lines.length; i++) {
    const open = /^```(\S*)\s*$/.exec(lines[i] as string);
    if (!open) continue;
    const end = lines.findIndex((l, j) => j > i && /^```\s*$/.test(l));
    if (end < 0) break;
    out.push({ lang: open[1] as string, body: lines.slice(i + 1, end).join('\n'), line: i + 1 });
    i = end;
  }
  return out;
}

export interface Example {
  /** The command as written, continuation lines joined by the shell. */
  command: string;
  /** What the doc shows after it, up to the next command or the end of the block. */
  output: string;
  line: number;
  /** The text of the nearest heading above it. */
  section: string;
}

/** Every "$ command" of the doc's unlabelled blocks, with the output quoted after it. */
export function examplesOf(md: string): Example[] {
  const lines = md.split('\n');
  const out: Example[] = [];
  const blocks = fencedBlocks(md);
  const inBlock = (n: number): boolean => blocks.some((b) => n >= b.line && n <= b.line + b.body.split('\n').length);
  for (const b of blocks) {
    if (b.lang !== '') continue;
    let section = '';
    for (let n = b.line - 1; n >= 1; n--) {
      if (/^#{1,4} /.test(lines[n - 1] as string) && !inBlock(n)) {
        section = (lines[n - 1] as string).replace(/^#+ /, '');
        break;
      }
    }
    const body = b.body.split('\n');
    for (let i = 0; i < body.length; i++) {
      if (!(body[i] as string).startsWith('$ ')) continue;
      const start = i;
      const cmd = [(body[i] as string).slice(2)];
      // A command goes on after a trailing backslash, and while a quoted argument is open.
      const open = (): boolean => (cmd.join('\n').match(/'/g) ?? []).length % 2 === 1;
      while (((body[i] as string).endsWith('\\') || open()) && i + 1 < body.length) cmd.push(body[++i] as string);
      const outLines: string[] = [];
      while (i + 1 < body.length && !(body[i + 1] as string).startsWith('$ ')) outLines.push(body[++i] as string);
      out.push({ command: cmd.join('\n'), output: outLines.join('\n').replace(/\n+$/, ''), line: b.line + 1 + start, section });
    }
  }
  return out;
}

export interface RunResult {
  code: number;
  output: string;
}

/**
 * Runs a doc's command with sh in the checkout, `npx tsx src/cli/main.ts` as written or not;
 * the output is standard output and standard error as they were interleaved. A
 * command that serves until stopped is given `until`: it is stopped (SIGTERM) once its output
 * matches, and the output so far is returned.
 */
export function runCommand(command: string, env: Record<string, string> = {}, options: { timeoutMs?: number; until?: RegExp | undefined; stdoutOnly?: boolean; stderrOnly?: boolean } = {}): Promise<RunResult> {
  const { timeoutMs = 60_000, until, stdoutOnly = false, stderrOnly = false } = options;
  const script = command.replaceAll('npx tsx src/cli/main.ts', `${process.execPath} --import tsx ${CLI_MAIN}`);
  return new Promise((resolve) => {
    const child = spawn('/bin/sh', ['-c', stdoutOnly ? script : stderrOnly ? `exec 2>&1 >/dev/null\n${script}` : `exec 2>&1\n${script}`], { cwd: REPO, env: { ...process.env, ...env }, stdio: ['ignore', 'pipe', 'ignore'], detached: true });
    let output = '';
    const timer = setTimeout(() => stop(), timeoutMs);
    const stop = (): void => {
      try {
        if (child.pid !== undefined) process.kill(-child.pid, 'SIGTERM');
      } catch {
        // already gone
      }
    };
    let done = false;
    child.stdout.on('data', (d: Buffer) => {
      if (done) return;
      output += d.toString();
      const m = until?.exec(output);
      if (m) {
        // What it printed up to the end of that line; what stopping it prints is not the example's.
        const end = output.indexOf('\n', m.index);
        output = end < 0 ? output : output.slice(0, end + 1);
        done = true;
        stop();
      }
    });
    child.on('close', (code) => {
      clearTimeout(timer);
      resolve({ code: code ?? 1, output });
    });
  });
}

type Part =
  | { kind: 'text'; text: string }
  | { kind: 'any' }
  | { kind: 'number'; doc: string }
  | { kind: 'vary'; doc: string; pattern: string };

const UUID = /[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}/;
const NUMBER = '-?\\d+(?:\\.\\d+)?(?:[eE][-+]?\\d+)?';
const JSON_SCALAR = '"(?:[^"\\\\]|\\\\.)*"|null|true|false|-?\\d+(?:\\.\\d+)?(?:[eE][-+]?\\d+)?';

/** Text with "..." as a gap, and ids (and whatever else varies) as varying values. */
function textParts(text: string, parts: Part[], varying: readonly RegExp[] = []): void {
  const kinds = [UUID, ...varying];
  const re = new RegExp(`\\.\\.\\.|${kinds.map((k) => `(${k.source})`).join('|')}`, 'g');
  let at = 0;
  for (const m of text.matchAll(re)) {
    if (m.index > at) parts.push({ kind: 'text', text: text.slice(at, m.index) });
    const kind = kinds[m.slice(1).findIndex((g) => g !== undefined)] ?? UUID;
    parts.push(m[0] === '...' ? { kind: 'any' } : { kind: 'vary', doc: m[0], pattern: kind.source });
    at = m.index + m[0].length;
  }
  if (at < text.length) parts.push({ kind: 'text', text: text.slice(at) });
}

/**
 * JSON as a doc writes it: whitespace between tokens dropped, each number a part of its own,
 * the value of a varying key matching any value.
 */
function jsonParts(text: string, varying: ReadonlySet<string>, varyingText: readonly RegExp[] = []): Part[] {
  const parts: Part[] = [];
  let i = 0;
  let pendingKey: string | null = null;
  while (i < text.length) {
    const c = text[i] as string;
    if (/\s/.test(c)) {
      i++;
      continue;
    }
    if (c === '"') {
      let j = i + 1;
      while (j < text.length && text[j] !== '"') j += text[j] === '\\' ? 2 : 1;
      const raw = text.slice(i, j + 1);
      i = j + 1;
      let k = i;
      while (k < text.length && /\s/.test(text[k] as string)) k++;
      const isKey = text[k] === ':';
      if (!isKey && pendingKey !== null && varying.has(pendingKey)) {
        parts.push({ kind: 'vary', doc: raw.slice(1, -1), pattern: JSON_SCALAR });
      } else {
        textParts(raw, parts, varyingText);
      }
      pendingKey = isKey ? raw.slice(1, -1) : null;
      continue;
    }
    if (text.startsWith('...', i)) {
      parts.push({ kind: 'any' });
      i += 3;
      pendingKey = null;
      continue;
    }
    const num = new RegExp(`^${NUMBER}`).exec(text.slice(i));
    if (num && /[-\d]/.test(c)) {
      parts.push(pendingKey !== null && varying.has(pendingKey) ? { kind: 'vary', doc: num[0], pattern: JSON_SCALAR } : { kind: 'number', doc: num[0] });
      i += num[0].length;
      pendingKey = null;
      continue;
    }
    const word = /^(null|true|false)/.exec(text.slice(i));
    if (word && pendingKey !== null && varying.has(pendingKey)) {
      parts.push({ kind: 'vary', doc: word[0], pattern: JSON_SCALAR });
      i += word[0].length;
      pendingKey = null;
      continue;
    }
    parts.push({ kind: 'text', text: c });
    if (c !== ':') pendingKey = null;
    i++;
  }
  return parts;
}

const partSource = (p: Part): string => (p.kind === 'text' ? escape(p.text) : p.kind === 'number' ? `(${NUMBER})` : p.kind === 'vary' ? `(${p.pattern})` : '');
const partShown = (p: Part): string => (p.kind === 'text' ? p.text : p.kind === 'any' ? '...' : p.doc);

function escape(s: string): string {
  return s.replace(/[.*+?^${}()|[\]\\]/g, '\\$&');
}

/** Whitespace outside JSON strings removed, as jsonParts reads the doc. */
function compactJson(text: string): string {
  let out = '';
  let inString = false;
  for (let i = 0; i < text.length; i++) {
    const c = text[i] as string;
    if (inString) {
      out += c;
      if (c === '\\') out += text[++i] ?? '';
      else if (c === '"') inString = false;
    } else if (c === '"') {
      inString = true;
      out += c;
    } else if (!/\s/.test(c)) out += c;
  }
  return out;
}

export interface QuoteOptions {
  /** JSON keys whose values change from run to run. */
  varying?: readonly string[];
  /** Numbers in the doc may be shortened: a number matches the output's rounded to as many decimals. */
  rounded?: boolean;
  /** Doc value → the value this run produced, for ids and cursors; filled as values are matched. */
  seen?: Map<string, string>;
  /** Header names whose values change from run to run. */
  varyingHeaders?: readonly string[];
  /** Patterns of text (in plain output, or inside JSON strings) whose values change from run to run. */
  varyingText?: readonly RegExp[];
}

export const DEFAULT_VARYING = ['request_id', 'batch_id', 'id', 'received_at', 'loaded_at', 'created_at', 'latency_ms', 'next_cursor', 'raised_at', 'cleared_at'];

function decimals(s: string): number | null {
  if (/[eE]/.test(s)) return null;
  return s.includes('.') ? (s.split('.')[1] as string).length : 0;
}

/** Each problem found, as a sentence naming what the doc quotes and what came; empty when it matches. */
export function quoteProblems(actual: string, quoted: string, options: QuoteOptions = {}): string[] {
  const seen = options.seen ?? new Map<string, string>();
  const problems: string[] = [];
  let docBody = quoted;
  let body = actual.replace(/\r\n/g, '\n');
  // curl -i: the status line exactly, and every header the doc shows, with its value.
  if (docBody.startsWith('HTTP/')) {
    const [docHead, ...docRest] = docBody.split('\n\n');
    const [head, ...rest] = body.split('\n\n');
    docBody = docRest.join('\n\n');
    body = rest.join('\n\n');
    const docLines = (docHead as string).split('\n');
    const lines = (head as string).split('\n');
    if (docLines[0] !== lines[0]) problems.push(`status: the doc says "${docLines[0]}", the run gave "${lines[0]}"`);
    const headers = new Map(lines.slice(1).map((l) => [l.slice(0, l.indexOf(':')).toLowerCase(), l.slice(l.indexOf(':') + 1).trim()]));
    for (const l of docLines.slice(1)) {
      const name = l.slice(0, l.indexOf(':')).toLowerCase();
      const value = l.slice(l.indexOf(':') + 1).trim();
      if (!headers.has(name)) problems.push(`header ${name}: the doc shows it, the answer has none`);
      else if (!(options.varyingHeaders ?? []).includes(name) && headers.get(name) !== value) problems.push(`header ${name}: the doc says "${value}", the answer "${headers.get(name)}"`);
    }
  }
  const json = /^[[{]/.test(docBody.trimStart());
  const parts = json ? jsonParts(docBody, new Set(options.varying ?? DEFAULT_VARYING), options.varyingText) : (() => {
    const p: Part[] = [];
    textParts(docBody.split('\n').map((l) => l.trimEnd()).join('\n'), p, options.varyingText);
    return p;
  })();
  const text = json ? compactJson(body) : body.split('\n').map((l) => l.trimEnd()).join('\n').replace(/\n+$/, '');

  // Segments between gaps, each matched where the last one ended (or anywhere after it, after a gap).
  let pos = 0;
  let gap = false;
  let segment: Part[] = [];
  const flush = (last: boolean): boolean => {
    if (segment.length === 0) return true;
    const source = segment.map(partSource).join('');
    const re = new RegExp(last ? `(?:${source})$` : source, gap ? 'g' : 'y');
    re.lastIndex = pos;
    const m = re.exec(text);
    const shown = segment.map(partShown).join('');
    if (!m || (!gap && m.index !== pos)) {
      // Point at the first piece that does not match: the longest run of pieces that does, then the next.
      let k = segment.length - 1;
      let end = pos;
      for (; k > 0; k--) {
        const head = new RegExp(segment.slice(0, k).map(partSource).join(''), gap ? 'g' : 'y');
        head.lastIndex = pos;
        const h = head.exec(text);
        if (h) {
          end = h.index + h[0].length;
          break;
        }
      }
      const before = segment.slice(Math.max(0, k - 3), k).map(partShown).join('');
      const next = segment.slice(k).map(partShown).join('');
      problems.push(`after ${JSON.stringify(before.slice(-80))} the doc quotes ${JSON.stringify(next.slice(0, 120))}, but the output has ${JSON.stringify(text.slice(end, end + 120))}`);
      return false;
    }
    let g = 1;
    for (const p of segment) {
      if (p.kind === 'text' || p.kind === 'any') continue;
      const got = m[g++] as string;
      const value = p.kind === 'vary' && got.startsWith('"') ? got.slice(1, -1) : got;
      if (p.kind === 'number') {
        const d = decimals(p.doc);
        const ok = Number(got) === Number(p.doc) || (options.rounded === true && d !== null && Math.abs(Number(got) - Number(p.doc)) <= 0.5 * 10 ** -d * (1 + 1e-9));
        if (!ok) problems.push(`the doc says ${p.doc} where the output has ${got}, in ${JSON.stringify(shown.slice(0, 120))}`);
      } else if (seen.has(p.doc) && seen.get(p.doc) !== value && p.pattern !== JSON_SCALAR) {
        problems.push(`the doc shows the id ${p.doc} twice, but the output has ${seen.get(p.doc)} and then ${value}`);
      } else {
        seen.set(p.doc, value);
      }
    }
    pos = m.index + m[0].length;
    segment = [];
    gap = false;
    return true;
  };
  for (const p of parts) {
    if (p.kind === 'any') {
      if (!flush(false)) return problems;
      gap = true;
    } else {
      segment.push(p);
    }
  }
  if (segment.length > 0) flush(true);
  else if (!gap && pos !== text.length) problems.push(`the output goes on after what the doc quotes: ${JSON.stringify(text.slice(pos, pos + 200))}`);
  return problems;
}

/** The command with every value the doc showed replaced by the one this run produced. */
export function carry(command: string, seen: ReadonlyMap<string, string>): string {
  let out = command;
  for (const [doc, actual] of seen) if (doc.length >= 6) out = out.replaceAll(doc, actual);
  return out;
}

/**
 * With DOCS_DUMP=FILE in the environment, every example's real output is appended to FILE: what
 * to paste into a doc after a change that moves its numbers (then trim it as the doc does).
 */
export function dumpOutput(doc: string, e: Example, output: string): void {
  const file = process.env.DOCS_DUMP;
  if (file) appendFileSync(file, `==== ${doc} line ${e.line} (${e.section})\n$ ${e.command}\n${output}\n`);
}

/**
 * Output of a run made today, written as the docs write it: "yesterday" is 2026-11-30 and today
 * 2026-12-01, the server's address is the doc's, and a demo's temporary folder is the doc's.
 */
export function asOfDocDay(output: string, docUrl: string): string {
  const DAY = 86_400_000;
  const today = Math.floor(Date.now() / DAY) * DAY;
  return output
    .replaceAll(new Date(today - DAY).toISOString().slice(0, 10), '2026-11-30')
    .replaceAll(new Date(today).toISOString().slice(0, 10), '2026-12-01')
    .replace(/http:\/\/127\.0\.0\.1:\d+/g, docUrl)
    .replace(/\/tmp\/plumbline-demo-\w+\//g, '/tmp/plumbline-demo-5aJVeG/');
}
