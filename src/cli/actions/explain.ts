import type { CliIo } from '../io.js';
import { type ScoreContext, type ScoreSummary, scoreAction } from './score.js';

export type ExplainContext = Omit<ScoreContext, 'explain'>;

/**
 * `plumbline explain`: `plumbline score` with each answer's explanation, as the service gives it
 * for `"explain": true` (src/bundle/explainer.ts). One JSON line per good row.
 */
export function explainAction(ctx: ExplainContext, io: CliIo): Promise<ScoreSummary> {
  return scoreAction({ ...ctx, explain: true }, io);
}
