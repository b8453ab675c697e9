import { hostname } from 'node:os';

export interface AlertFacts {
  alert_id: string;
  rule: string;
  model: string;
  signal: string;
  direction: 'above' | 'below';
  threshold: number;
  window: string;
  value: number;
  raised_at: string;
  cleared_at: string | null;
  message: string;
}

export type AlertEventType = 'plumbline.alert.raised' | 'plumbline.alert.cleared';

/** The event source: this host's plumbline (a URI reference, CloudEvents 1.0 section 3.1.1). */
export const EVENT_SOURCE = `urn:plumbline:${hostname()}:alerts`;

/**
 * A CloudEvents 1.0 event in structured JSON mode (the JSON event format, sent as
 * application/cloudevents+json): the required id, source, specversion and type, and time,
 * subject, datacontenttype and data.
 */
export function alertEvent(id: string, type: AlertEventType, at: number, facts: AlertFacts): string {
  return JSON.stringify({
    specversion: '1.0',
    id,
    source: EVENT_SOURCE,
    type,
    subject: `${facts.rule}/${facts.model}`,
    time: new Date(at).toISOString(),
    datacontenttype: 'application/json',
    data: facts,
  });
}

export function describeAlert(f: Pick<AlertFacts, 'signal' | 'value' | 'direction' | 'threshold' | 'window' | 'model'>, cleared: boolean): string {
  const v = Number(f.value.toPrecision(4));
  const t = Number(f.threshold.toPrecision(4));
  return cleared
    ? `${f.signal} of ${f.model} is back ${f.direction === 'above' ? 'at or below' : 'at or above'} ${t} (now ${v}) over ${f.window}`
    : `${f.signal} of ${f.model} is ${v}, ${f.direction} ${t}, over ${f.window}`;
}
