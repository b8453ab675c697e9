import { DEFAULT_ALPHA, takesAlpha } from '../core/activations.js';
import type { DenseLayer, Network } from '../core/network.js';
import { decodeFloat32, encodeFloat32 } from './float32-codec.js';
import type { LayerJson } from './schema.js';

export function encodeNetwork(net: Network): { layers: LayerJson[] } {
  return {
    layers: net.layers.map((l) => ({
      inputs: l.inputs,
      outputs: l.outputs,
      activation: l.activation,
      ...(takesAlpha(l.activation) ? { alpha: Math.fround(l.alpha) } : {}),
      weights: encodeFloat32(l.weights),
      bias: encodeFloat32(l.bias),
    })),
  };
}

/**
 * Decodes the layers; throws an Error whose message starts with the JSON path of the bad field
 * (`path` is where the network sits: `network` in version 1, `members[m]` in version 2).
 */
export function decodeNetwork(json: { layers: LayerJson[] }, path = 'network'): Network {
  const layers: DenseLayer[] = json.layers.map((l, i) => {
    const at = `${path}.layers[${i}]`;
    const decode = (field: 'weights' | 'bias', n: number): Float64Array => {
      try {
        return decodeFloat32(l[field], n);
      } catch (err) {
        throw new Error(`${at}.${field} ${(err as Error).message}`);
      }
    };
    return {
      inputs: l.inputs,
      outputs: l.outputs,
      activation: l.activation,
      alpha: l.alpha ?? DEFAULT_ALPHA[l.activation] ?? 0,
      weights: decode('weights', l.inputs * l.outputs),
      bias: decode('bias', l.outputs),
    };
  });
  return { layers };
}
