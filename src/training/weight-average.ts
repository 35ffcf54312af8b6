/**
 * A running average of a network's weights over its last steps: an exponential moving average
 * (Polyak & Juditsky 1992 average the iterates; the exponential form, with a decay that starts low so the
 * first steps' weights do not linger, is TensorFlow's ExponentialMovingAverage with num_updates, from
 * memory). On a few hundred photos the weights of successive steps wander around a plateau; their average
 * sits nearer its middle, so a kept model depends less on which step a run stopped at.
 */
import type * as tf from '@tensorflow/tfjs';

export interface WeightAverageState {
  /** The averaged values of every weight of the network, in getWeights() order. */
  values: Float32Array[];
  /** Steps averaged so far. */
  updates: number;
}

/**
 * The decay after `updates` steps for an average over about `over` steps: 1 - 1/over, but at most
 * (1 + updates) / (10 + updates), so that the average follows the weights closely at the start.
 * @example
 *   averageDecay(200, 0);    // 0.1
 *   averageDecay(200, 1000); // 0.995
 */
export function averageDecay(over: number, updates: number): number {
  return Math.min(1 - 1 / over, (1 + updates) / (10 + updates));
}

/**
 * The average with the network's current weights taken in for one more step: a new state (the given
 * one is not changed).
 * @example
 *   let average = startAverage(network);
 *   // after each optimiser step:
 *   average = updateAverage(average, weightViews(network), 200);
 */
export function updateAverage(state: WeightAverageState, weights: readonly Float32Array[], over: number): WeightAverageState {
  if (weights.length !== state.values.length)
    throw new RangeError(`updateAverage: ${weights.length} weights, the average has ${state.values.length}`);
  const d = averageDecay(over, state.updates);
  const values = state.values.map((avg, k) => {
    const w = weights[k]!;
    if (w.length !== avg.length) throw new RangeError(`updateAverage: weight ${k} has ${w.length} values, the average ${avg.length}`);
    const out = new Float32Array(avg.length);
    for (let i = 0; i < avg.length; i++) out[i] = d * avg[i]! + (1 - d) * w[i]!;
    return out;
  });
  return { values, updates: state.updates + 1 };
}

/** The average of a network that has taken no step yet: its own weights. */
export function startAverage(network: tf.LayersModel): WeightAverageState {
  return { values: weightValues(network), updates: 0 };
}

/** Copies of every weight of a network, in getWeights() order. */
export function weightValues(network: tf.LayersModel): Float32Array[] {
  return network.getWeights().map((w) => (w.dataSync() as Float32Array).slice());
}

/** Every weight of a network as it is read, not copied: for a reader that keeps none of them. */
export function weightViews(network: tf.LayersModel): Float32Array[] {
  return network.getWeights().map((w) => w.dataSync() as Float32Array);
}
