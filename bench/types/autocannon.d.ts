// The part of autocannon's API the benchmarks use (it ships no types).
declare module 'autocannon' {
  interface Histogram {
    average: number;
    mean: number;
    stddev: number;
    min: number;
    max: number;
    total: number;
    p50: number;
    p90: number;
    p97_5: number;
    p99: number;
    p99_9: number;
  }
  interface Result {
    requests: Histogram;
    latency: Histogram;
    throughput: Histogram;
    errors: number;
    timeouts: number;
    non2xx: number;
    '2xx': number;
    duration: number;
  }
  interface Options {
    url: string;
    method?: string;
    headers?: Record<string, string>;
    body?: string;
    connections?: number;
    pipelining?: number;
    duration?: number;
    amount?: number;
    overallRate?: number;
    workers?: number;
  }
  function autocannon(options: Options): Promise<Result>;
  export default autocannon;
}
