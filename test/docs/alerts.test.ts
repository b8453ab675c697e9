import { describe, expect, it } from 'vitest';
import { type AlertFacts, EVENT_SOURCE, alertEvent, describeAlert } from '../../src/alerts/cloudevents.js';
import { configSchema } from '../../src/config/config.js';
import { fencedBlocks, quoteProblems, readDoc } from '../helpers/doc-examples.js';

// docs/alerts.md: its configuration is one the service takes, and the event it shows (from a live
// run, whose values depend on its timing) is what the code builds from those values.

const DOC = readDoc('docs/alerts.md');

describe('docs/alerts.md', () => {
  it('shows a configuration the service accepts', () => {
    const block = fencedBlocks(DOC).find((b) => b.lang === 'json' && b.body.includes('"rules"'));
    const parsed = configSchema.safeParse(JSON.parse(block?.body ?? '{}'));
    expect(parsed.error).toBeUndefined();
  });

  it('shows the event the code builds for the raise it describes, and the sentences it writes', () => {
    const block = fencedBlocks(DOC).find((b) => b.lang === 'json' && b.body.includes('"specversion"'));
    const shown = JSON.parse(block?.body ?? '{}') as { id: string; type: 'plumbline.alert.raised'; time: string; data: AlertFacts };
    expect(shown.data.message).toBe(describeAlert(shown.data, false));
    const built = alertEvent(shown.id, shown.type, Date.parse(shown.time), { ...shown.data, message: describeAlert(shown.data, false) }).replace(EVENT_SOURCE, 'urn:plumbline:vm:alerts');
    const problems = quoteProblems(built, block?.body ?? '', { varying: [] });
    expect(problems, problems.join('\n')).toEqual([]);
    const cleared = describeAlert({ ...shown.data, value: 0.025423728813559324 }, true);
    expect(DOC).toContain(`"message": "${cleared.replace(' back at or below ', ' back at or below\n')}"`);
  });
});
