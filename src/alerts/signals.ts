import type { AlertsStore } from '../store/alerts-store.js';
import type { OutcomesStore } from '../store/outcomes-store.js';
import type { AlertRule } from '../config/alert-rules.js';

export interface SignalValue {
  value: number;
  /** The requests the value rests on, compared with the rule's min_requests. */
  requests: number;
}

/**
 * A rule's signal for one model over [now - window, now), or null when nothing was logged.
 * max_psi is the largest feature PSI of the model's newest drift report, whatever its window.
 */
export async function computeSignal(store: AlertsStore, rule: AlertRule, model: string, now: number, outcomes?: Pick<OutcomesStore, 'windowOutcomes'>): Promise<SignalValue | null> {
  const from = now - rule.window;
  if (rule.signal === 'accuracy' || rule.signal === 'labelled_rate') {
    // Over the answers received in the window and the outcomes recorded for them by now: an
    // outcome arrives after its answer, so a window that ends now fills in as outcomes come.
    const o = outcomes ? await outcomes.windowOutcomes(model, from, now) : undefined;
    if (!o || o.scored === 0) return null;
    if (rule.signal === 'labelled_rate') return { value: o.labelled / o.scored, requests: o.scored };
    return o.labelled > 0 ? { value: o.right / o.labelled, requests: o.labelled } : null;
  }
  if (rule.signal === 'max_psi') {
    const text = await store.latestReport(model);
    if (!text) return null;
    const report = JSON.parse(text) as { counts: { scored: number }; features: Array<{ psi: number | null }> };
    const psis = report.features.map((f) => f.psi).filter((p): p is number => p !== null);
    return psis.length > 0 ? { value: Math.max(...psis), requests: report.counts.scored } : null;
  }
  if (rule.signal === 'rejected_rate') {
    const rejected = await store.rejectedCount(model, from, now);
    const total = (await store.windowCounts(model, from, now)).scored + rejected;
    return total > 0 ? { value: rejected / total, requests: total } : null;
  }
  const c = await store.windowCounts(model, from, now);
  if (c.scored === 0) return null;
  switch (rule.signal) {
    case 'out_of_domain_rate':
      return { value: c.outOfDomain / c.scored, requests: c.scored };
    case 'review_rate':
      return { value: c.review / c.scored, requests: c.scored };
    case 'mean_margin':
      return { value: c.marginSum / c.scored, requests: c.scored };
    default: {
      const label = rule.signal.slice('class_fraction:'.length);
      return { value: (await store.labelCount(model, label, from, now)) / c.scored, requests: c.scored };
    }
  }
}
