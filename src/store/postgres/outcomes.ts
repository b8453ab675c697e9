import { ProblemError } from '../../errors.js';
import type { OutcomesStore } from '../outcomes-store.js';

// Outcomes (POST /v1/outcomes, the outcomes report, export and compare) are kept in the SQLite
// store only in this version. On PostgreSQL the reads that other answers fold outcomes into see
// none (GET /v1/requests gives `outcome: null`, the drift report and the alert signals find no
// labelled answer), and everything that would record or report them is refused, saying so.

const refuse = (): never => {
  throw new ProblemError('outcomes-unavailable', 'outcomes are kept on the SQLite store only in this version; this service runs on PostgreSQL, so nothing was recorded or read');
};

export function serverOutcomesUnsupported(): OutcomesStore {
  return {
    record: refuse,
    current: () => new Map(),
    windowOutcomes: () => ({ scored: 0, labelled: 0, right: 0 }),
    countScored: refuse,
    labelledRows: refuse,
    loggedVectors: refuse,
    latestModel: refuse,
    describeModel: () => null,
    verifyChain: refuse,
  };
}
