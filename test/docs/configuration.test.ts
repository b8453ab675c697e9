import { afterAll, describe, it } from 'vitest';
import { tempDir } from '../helpers/datasets.js';
import { dumpOutput, examplesOf, fencedBlocks, quoteProblems, readDoc, runCommand } from '../helpers/doc-examples.js';

// docs/configuration.md: every example of `plumbline serve` refusing or taking a configuration,
// run as written, with the files it names (bad.json, bad5.json, plumbline.json) as the doc shows
// them, in a temporary folder.

const DOC = readDoc('docs/configuration.md');
const tmp = tempDir('plumbline-doc-config-');
afterAll(() => tmp.remove());

const FILES = ['bad.json', 'bad5.json', 'plumbline.json', 'missing.json', 'bad2.json', 'bad3.json'];
const DBS: Array<[string, string]> = [
  ['/tmp/env.db', tmp.file('env.db')],
  ['/tmp/flag.db', tmp.file('flag.db')],
];
const toReal = (s: string): string => [...FILES.map((f) => [f, tmp.file(f)] as [string, string]), ...DBS].reduce((t, [doc, real]) => t.replace(new RegExp(`(?<![\\w/.-])${doc.replace(/\./g, '\\.')}`, 'g'), real), s);
const toDoc = (s: string): string => [...FILES.map((f) => [f, tmp.file(f)] as [string, string]), ...DBS].reduce((t, [doc, real]) => t.replaceAll(real, doc), s);

// The example file, as the doc shows it, and each file the doc shows with cat, with what cat shows.
tmp.file('plumbline.json', fencedBlocks(DOC).find((b) => b.lang === 'json' && b.body.includes('"models_dir"'))?.body ?? '');
for (const e of examplesOf(DOC)) {
  const cat = /^cat (\S+)$/.exec(e.command);
  if (cat) tmp.file(cat[1] as string, `${e.output}\n`);
}

// Each example starts its own process on its own files: they run side by side.
describe.concurrent('docs/configuration.md', () => {
  for (const e of examplesOf(DOC)) {
    it(`line ${e.line}: ${e.command.split('\n')[0]?.slice(0, 100)}`, async ({ expect }) => {
      const cat = /^cat (\S+)$/.exec(e.command);
      const serving = e.output.includes('"msg":"serving"');
      const command = toReal(e.command).replace('PLUMBLINE_PORT=18128', 'PLUMBLINE_PORT=0');
      // A refusal is written to standard error, and the doc shows that; the database of a command
      // that names none is a temporary one, not var/plumbline.db in the checkout.
      const refusal = /^(plumbline|error):/.test(e.output);
      const run = await runCommand(command, { PLUMBLINE_DB: tmp.file(`default-${e.line}.db`) }, { until: serving ? /"msg":"serving"/ : undefined, stderrOnly: refusal });
      const output = toDoc(run.output).replace(/http:\/\/127\.0\.0\.1:\d+/g, 'http://127.0.0.1:18128');
      dumpOutput('configuration.md', e, output);
      const problems = quoteProblems(output, e.output);
      expect(problems, problems.join('\n')).toEqual([]);
      if (!serving && !cat) expect(run.code).toBe(2);
    });
  }

  it('shows how a configuration file that cannot be used at all is refused', async ({ expect }) => {
    tmp.file('bad2.json', '{"port": 8080, port: 1}');
    tmp.file('bad3.json', '[1, 2]');
    const block = fencedBlocks(DOC).find((b) => b.body.includes('config file missing.json cannot be read'));
    let output = '';
    for (const f of ['missing.json', 'bad2.json', 'bad3.json']) {
      const run = await runCommand(`npx tsx src/cli/main.ts serve --config ${tmp.file(f)}`);
      expect(run.code).toBe(2);
      output += toDoc(run.output);
    }
    expect(output.trimEnd()).toBe(block?.body);
  });
});
