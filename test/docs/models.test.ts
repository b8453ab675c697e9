import { readFileSync } from 'node:fs';
import { afterAll, describe, expect, it } from 'vitest';
import { tempDir } from '../helpers/datasets.js';
import { dumpOutput, examplesOf, quoteProblems, readDoc, runCommand } from '../helpers/doc-examples.js';

// docs/models.md: the import example, run as written on the fixture network, with its preprocess
// file made from the fixture's record (test/fixtures/onnx/expected.json) and temporary paths.

const DOC = readDoc('docs/models.md');
const tmp = tempDir('plumbline-doc-models-');
afterAll(() => tmp.remove());

describe('docs/models.md', () => {
  it('shows what plumbline import prints for the Wine network', async () => {
    const e = examplesOf(DOC).find((x) => x.command.includes(' import '));
    expect(e).toBeDefined();
    const expected = JSON.parse(readFileSync(new URL('../fixtures/onnx/expected.json', import.meta.url), 'utf8')) as { models: Array<{ file: string; preprocess: unknown }> };
    const pre = tmp.file('wine-preprocess.json', JSON.stringify(expected.models.find((m) => m.file === 'wine-relu-opset17.onnx')?.preprocess));
    const out = tmp.file('wine.bundle.json');
    const command = (e?.command ?? '').replace('wine-preprocess.json', pre).replace('wine.bundle.json', out);
    const run = await runCommand(command);
    const output = run.output.replaceAll(out, 'wine.bundle.json');
    dumpOutput('models.md', e as NonNullable<typeof e>, output);
    const problems = quoteProblems(output, e?.output ?? '');
    expect(problems, problems.join('\n')).toEqual([]);
    expect(run.code).toBe(0);
  });
});
