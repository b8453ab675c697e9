import { z } from 'zod';
import { formatDuration, parseDuration } from './durations.js';

const DAY_MS = 86_400_000;

/** A duration in [min, max] ms; timers cannot wait longer than about 24.8 days, so no bound is above 7 days but windows'. */
const duration = (what: string, min = 1, max = 7 * DAY_MS) =>
  z
    .string()
    .refine((s) => parseDuration(s) !== null, `${what} must be a whole number of milliseconds written as a duration such as 30s, 15m, 2h or 1d`)
    .transform((s) => parseDuration(s) as number)
    .refine((ms) => ms >= min && ms <= max, `${what} must be from ${formatDuration(min)} to ${formatDuration(max)}`);

/** The signals a rule can watch; class_fraction takes a class name after the colon. */
export const SIGNAL = /^(out_of_domain_rate|rejected_rate|review_rate|mean_margin|max_psi|accuracy|labelled_rate|class_fraction:.+)$/;

export const ruleSchema = z
  .strictObject({
    name: z.string().regex(/^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$/, 'must be 1-64 letters, digits, dots, dashes or underscores'),
    /** A model name, or "*" for one alert per loaded model. */
    model: z.string().min(1),
    signal: z.string().regex(SIGNAL, 'must be out_of_domain_rate, rejected_rate, review_rate, mean_margin, max_psi, accuracy, labelled_rate or class_fraction:<class>'),
    window: duration('window', 1000, 31 * DAY_MS).default(15 * 60_000),
    above: z.number().optional(),
    below: z.number().optional(),
    /** A multiple of the bundle's measured false-alarm rate, for out_of_domain_rate: raise above k x that rate. */
    above_expected: z.number().positive().optional(),
    min_requests: z.number().int().min(1).default(30),
    /** For accuracy: fewer answers with an outcome in the window neither raise nor clear. */
    min_labelled: z.number().int().min(1).default(30),
    sustain: duration('sustain', 0).default(0),
    notify: z.array(z.string().min(1)).default([]),
  })
  .superRefine((r, ctx) => {
    const given = [r.above, r.below, r.above_expected].filter((v) => v !== undefined).length;
    if (given !== 1) ctx.addIssue({ code: 'custom', path: ['above'], message: 'give exactly one of above, below or above_expected' });
    if (r.above_expected !== undefined && r.signal !== 'out_of_domain_rate') ctx.addIssue({ code: 'custom', path: ['above_expected'], message: 'applies to the out_of_domain_rate signal only' });
  });

export type AlertRule = z.infer<typeof ruleSchema>;

export const webhookSchema = z
  .strictObject({
    url: z.url({ protocol: /^https?$/ }),
    /** Standard Webhooks secret: "whsec_" and base64 key bytes. */
    secret: z.string().regex(/^whsec_[A-Za-z0-9+/]+={0,2}$/, 'must be whsec_ followed by base64').optional(),
    /** Name of an environment variable holding the secret instead (kept out of files and logs). */
    secret_env: z.string().regex(/^[A-Za-z_][A-Za-z0-9_]*$/, 'must be an environment variable name').optional(),
    /** Seconds to wait for an answer before counting the attempt failed. */
    timeout_s: z.number().positive().max(120).default(10),
  })
  .refine((w) => (w.secret === undefined) !== (w.secret_env === undefined), { message: 'give exactly one of secret or secret_env', path: ['secret'] });

export const alertsSchema = z
  .strictObject({
    check_every: duration('check_every', 1000, DAY_MS).default(30_000),
    rules: z.array(ruleSchema).default([]),
    webhooks: z.record(z.string().regex(/^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$/, 'webhook names are 1-64 letters, digits, dots, dashes or underscores'), webhookSchema).default({}),
    delivery: z
      .strictObject({
        /** First retry after about this long; each later one waits twice as long, with jitter. */
        retry_base: duration('retry_base').default(5_000),
        retry_cap: duration('retry_cap').default(3_600_000),
        /** Give up, mark failed and log, this long after the event. */
        give_up_after: duration('give_up_after').default(24 * 3_600_000),
      })
      .prefault({}),
  })
  .superRefine((a, ctx) => {
    const names = new Set<string>();
    a.rules.forEach((r, i) => {
      if (names.has(r.name)) ctx.addIssue({ code: 'custom', path: ['rules', i, 'name'], message: `${r.name} names two rules` });
      names.add(r.name);
      r.notify.forEach((w, j) => {
        if (!Object.hasOwn(a.webhooks, w)) ctx.addIssue({ code: 'custom', path: ['rules', i, 'notify', j], message: `${w} is not a webhook in alerts.webhooks` });
      });
    });
  });

export type AlertsConfig = z.infer<typeof alertsSchema>;
