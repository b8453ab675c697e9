import type { FastifyBaseLogger } from 'fastify';
import type { ChildLoggerOptions } from 'pino';

type Bindings = Record<string, unknown>;
type ChildOptions = { level?: string } & Record<string, unknown>;
type Method = 'fatal' | 'error' | 'warn' | 'info' | 'debug' | 'trace';

/** pino's numeric levels (pino's documentation, "Logger Instance: levels"). */
const RANK: Record<string, number> = { trace: 10, debug: 20, info: 30, warn: 40, error: 50, fatal: 60, silent: Number.POSITIVE_INFINITY };

/**
 * The logger of one request, made when a line is first written at an enabled level. fastify gives
 * every request a child of the service logger carrying its id, and pino's child() builds a new
 * logger each time (about 1 to 2 µs a request, measured with bench/http.ts); most answers write
 * nothing below the configured level, so they never pay for it. Lines written carry the same
 * bindings and go to the same destination as the eager child's would.
 */
class LazyRequestLogger {
  readonly #parent: FastifyBaseLogger;
  readonly #bindings: Bindings;
  readonly #options: ChildOptions;
  #child: FastifyBaseLogger | null = null;
  #level: string;

  constructor(parent: FastifyBaseLogger, bindings: Bindings, options: ChildOptions) {
    this.#parent = parent;
    this.#bindings = bindings;
    this.#options = options;
    this.#level = options.level ?? parent.level;
  }

  get level(): string {
    return this.#child ? this.#child.level : this.#level;
  }

  set level(level: string) {
    if (this.#child) this.#child.level = level;
    else this.#level = level;
  }

  /** The real child, made once. */
  #made(): FastifyBaseLogger {
    if (this.#child === null) {
      this.#child = this.#parent.child(this.#bindings, this.#options);
      if (this.#child.level !== this.#level) this.#child.level = this.#level;
    }
    return this.#child;
  }

  #write(method: Method, args: unknown[]): void {
    if (this.#child === null && (RANK[method] as number) < (RANK[this.#level] ?? 0)) return;
    (this.#made()[method] as (...a: unknown[]) => void)(...args);
  }

  fatal(...args: unknown[]): void {
    this.#write('fatal', args);
  }
  error(...args: unknown[]): void {
    this.#write('error', args);
  }
  warn(...args: unknown[]): void {
    this.#write('warn', args);
  }
  info(...args: unknown[]): void {
    this.#write('info', args);
  }
  debug(...args: unknown[]): void {
    this.#write('debug', args);
  }
  trace(...args: unknown[]): void {
    this.#write('trace', args);
  }
  silent(): void {}

  child(bindings: Bindings, options?: ChildOptions): FastifyBaseLogger {
    return this.#made().child(bindings, options);
  }
}

/** fastify's `childLoggerFactory`: a request logger made on first use (LazyRequestLogger). */
export function lazyRequestLogger(parent: FastifyBaseLogger, bindings: Bindings, options: ChildLoggerOptions): FastifyBaseLogger {
  return new LazyRequestLogger(parent, bindings, options as ChildOptions) as unknown as FastifyBaseLogger;
}
