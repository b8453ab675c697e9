import erf from '@stdlib/math-base-special-erf';

export const ACTIVATIONS = [
  'identity',
  'relu',
  'leaky_relu',
  'elu',
  'sigmoid',
  'tanh',
  'sin',
  'gelu',
  'softplus',
] as const;

export type ActivationName = (typeof ACTIVATIONS)[number];

/** Default alpha of the parametrised activations, as PyTorch and ONNX define them (common practice). */
export const DEFAULT_ALPHA: Partial<Record<ActivationName, number>> = {
  leaky_relu: 0.01,
  elu: 1,
};

export function isActivationName(value: string): value is ActivationName {
  return (ACTIVATIONS as readonly string[]).includes(value);
}

/** Whether the activation takes an alpha parameter. */
export function takesAlpha(name: ActivationName): boolean {
  return name === 'leaky_relu' || name === 'elu';
}

const SQRT1_2 = Math.SQRT1_2;
const INV_SQRT_2PI = 1 / Math.sqrt(2 * Math.PI);

/** Applies the activation in place to values[start, end). */
export function activateInPlace(name: ActivationName, alpha: number, values: Float64Array, start = 0, end = values.length): void {
  switch (name) {
    case 'identity':
      return;
    case 'relu':
      // `< 0`, not `!(> 0)`: a NaN must stay NaN so that the scorer sees it, not turn into 0.
      for (let i = start; i < end; i++) if ((values[i] as number) < 0) values[i] = 0;
      return;
    case 'leaky_relu':
      for (let i = start; i < end; i++) {
        const v = values[i] as number;
        if (v < 0) values[i] = alpha * v;
      }
      return;
    case 'elu':
      for (let i = start; i < end; i++) {
        const v = values[i] as number;
        if (v < 0) values[i] = alpha * Math.expm1(v);
      }
      return;
    case 'sigmoid':
      for (let i = start; i < end; i++) values[i] = sigmoid(values[i] as number);
      return;
    case 'tanh':
      for (let i = start; i < end; i++) values[i] = Math.tanh(values[i] as number);
      return;
    case 'sin':
      for (let i = start; i < end; i++) values[i] = Math.sin(values[i] as number);
      return;
    case 'gelu':
      // Exact GELU, x * Phi(x) (Hendrycks & Gimpel 2016), the default of PyTorch and of ONNX Gelu.
      for (let i = start; i < end; i++) {
        const v = values[i] as number;
        values[i] = 0.5 * v * (1 + erf(v * SQRT1_2));
      }
      return;
    case 'softplus':
      for (let i = start; i < end; i++) values[i] = softplus(values[i] as number);
      return;
  }
}

/**
 * Multiplies grad[i] by f'(pre[i]) in place; post[i] = f(pre[i]) lets tanh and sigmoid reuse
 * the forward value.
 */
export function multiplyByDerivative(
  name: ActivationName,
  alpha: number,
  pre: Float64Array,
  post: Float64Array,
  grad: Float64Array,
): void {
  const n = grad.length;
  switch (name) {
    case 'identity':
      return;
    case 'relu':
      for (let i = 0; i < n; i++) if (!((pre[i] as number) > 0)) grad[i] = 0;
      return;
    case 'leaky_relu':
      for (let i = 0; i < n; i++) if ((pre[i] as number) < 0) grad[i] = (grad[i] as number) * alpha;
      return;
    case 'elu':
      // d/dx alpha (e^x - 1) = alpha e^x = f(x) + alpha for x < 0
      for (let i = 0; i < n; i++) if ((pre[i] as number) < 0) grad[i] = (grad[i] as number) * ((post[i] as number) + alpha);
      return;
    case 'sigmoid':
      for (let i = 0; i < n; i++) {
        const s = post[i] as number;
        grad[i] = (grad[i] as number) * s * (1 - s);
      }
      return;
    case 'tanh':
      for (let i = 0; i < n; i++) {
        const t = post[i] as number;
        grad[i] = (grad[i] as number) * (1 - t * t);
      }
      return;
    case 'sin':
      for (let i = 0; i < n; i++) grad[i] = (grad[i] as number) * Math.cos(pre[i] as number);
      return;
    case 'gelu':
      for (let i = 0; i < n; i++) {
        const x = pre[i] as number;
        const cdf = 0.5 * (1 + erf(x * SQRT1_2));
        grad[i] = (grad[i] as number) * (cdf + x * INV_SQRT_2PI * Math.exp(-0.5 * x * x));
      }
      return;
    case 'softplus':
      for (let i = 0; i < n; i++) grad[i] = (grad[i] as number) * sigmoid(pre[i] as number);
      return;
  }
}

export function sigmoid(x: number): number {
  // Two branches so that exp never overflows.
  if (x >= 0) return 1 / (1 + Math.exp(-x));
  const e = Math.exp(x);
  return e / (1 + e);
}

export function softplus(x: number): number {
  // log(1 + e^x) = max(x, 0) + log1p(e^-|x|), exact in float64 for any x.
  return Math.max(x, 0) + Math.log1p(Math.exp(-Math.abs(x)));
}
