/**
 * One optimisation step at a time: targets, rebalanced cross-entropy and an Adam update (Kingma
 * & Ba 2015), with the optimiser's whole state readable and writable so that a run saved and
 * resumed continues bit-for-bit as if never stopped.
 */
import * as tf from '@tensorflow/tfjs';
import { BACKBONE_CHANNELS, type BorrowedInputs } from './backbone.js';
import { type AbBins, abBins } from './bins.js';
import { batchTargets, weightedCrossEntropy } from './loss.js';
import { OUTPUT_STRIDE, toNetworkInput } from './network.js';

export interface TrainerOptions {
  /** Adam step size, e.g. 1e-3 from scratch, 1e-4 when tuning. */
  learningRate: number;
  /** Rebalancing weight per bin (rebalanceWeights()). */
  classWeights: Float32Array;
  /** The bins the network predicts; default abBins(). */
  bins?: AbBins;
  /** Adam's decay rates and epsilon; defaults 0.9, 0.999, 1e-7 (TensorFlow.js's own). */
  beta1?: number;
  beta2?: number;
  epsilon?: number;
}

/** Adam's first and second moments of one trainable weight. */
export interface MomentState {
  /** The weight's name in the network (layer/kernel), stable across save and load. */
  name: string;
  shape: number[];
  m: Float32Array;
  v: Float32Array;
}

/** Everything the optimiser carries between steps. Plain data: numbers and Float32Arrays. */
export interface TrainerState {
  /** Adam steps taken so far. */
  step: number;
  learningRate: number;
  beta1: number;
  beta2: number;
  epsilon: number;
  moments: MomentState[];
}

export interface Trainer {
  /**
   * One step on a batch: `L` holds n planes of h x w L* values (0-100); `ab` holds per image its
   * a* plane then its b* plane, h x w each, at full resolution. h and w must be multiples of 16.
   * `borrowed` carries the backbone's features for a network that reads them (borrowedInputs, n of them).
   * Returns the batch loss.
   */
  step(L: Float32Array, ab: Float32Array, n: number, h: number, w: number, borrowed?: BorrowedInputs): number;
  /** Steps taken (including those restored by setState). */
  readonly steps: number;
  /** The Adam step size; may be changed between steps (schedules). */
  learningRate: number;
  /** A copy of the optimiser state (the network's weights are saved separately). */
  getState(): Promise<TrainerState>;
  /** Restores a state from getState() for the same network layout and trainable set. */
  setState(state: TrainerState): void;
  /** Frees the optimiser's tensors (not the network). */
  dispose(): void;
}

interface Slot {
  name: string;
  variable: tf.Variable;
  m: tf.Variable;
  v: tf.Variable;
}

/**
 * Creates a trainer for the weights of `network` that are trainable now (call freezeEncoder first
 * to tune the decoder only).
 * @example
 * const trainer = createTrainer(net, { learningRate: 1e-3, classWeights: rebalanceWeights(counts) });
 * const loss = trainer.step(L, ab, 16, 128, 128);
 * const state = await trainer.getState(); // save beside the weights; later: trainer.setState(state)
 */
export function createTrainer(network: tf.LayersModel, options: TrainerOptions): Trainer {
  const bins = options.bins ?? abBins();
  const q = bins.count;
  if (options.classWeights.length !== q) {
    throw new RangeError(`createTrainer: ${options.classWeights.length} class weights for ${q} bins`);
  }
  const beta1 = options.beta1 ?? 0.9;
  const beta2 = options.beta2 ?? 0.999;
  const epsilon = options.epsilon ?? 1e-7;
  let learningRate = options.learningRate;
  let steps = 0;
  const slots: Slot[] = network.trainableWeights.map((w) => ({
    name: w.originalName,
    variable: w.read() as tf.Variable,
    m: tf.variable(tf.zeros(w.shape as number[]), false),
    v: tf.variable(tf.zeros(w.shape as number[]), false),
  }));
  const variables = slots.map((s) => s.variable);

  function step(L: Float32Array, ab: Float32Array, n: number, h: number, w: number, borrowed?: BorrowedInputs): number {
    if (h % 16 !== 0 || w % 16 !== 0) throw new RangeError(`trainer.step: crops must be multiples of 16, got ${w} x ${h}`);
    if (L.length !== n * h * w) throw new RangeError(`trainer.step: L has ${L.length} values, expected ${n * h * w}`);
    const targets = batchTargets(ab, n, h, w, OUTPUT_STRIDE, bins, options.classWeights);
    const t = steps + 1;
    const correct1 = 1 - Math.pow(beta1, t);
    const correct2 = 1 - Math.pow(beta2, t);
    const loss = tf.tidy(() => {
      const x = networkInputs(toNetworkInput(L), n, h, w, borrowed);
      const target = tf.tensor4d(targets.target, [n, targets.height, targets.width, q]);
      const weight = tf.tensor3d(targets.weight, [n, targets.height, targets.width]);
      const { value, grads } = tf.variableGrads(
        () => weightedCrossEntropy(network.apply(x, { training: true }) as tf.Tensor4D, target, weight),
        variables,
      );
      for (const slot of slots) {
        const g = grads[slot.variable.name];
        if (!g) continue;
        const m = tf.add(tf.mul(slot.m, beta1), tf.mul(g, 1 - beta1));
        const v = tf.add(tf.mul(slot.v, beta2), tf.mul(tf.square(g), 1 - beta2));
        slot.m.assign(m);
        slot.v.assign(v);
        const update = tf.div(tf.div(m, correct1), tf.add(tf.sqrt(tf.div(v, correct2)), epsilon));
        slot.variable.assign(tf.sub(slot.variable, tf.mul(update, learningRate)));
      }
      return value;
    });
    const result = loss.dataSync()[0];
    loss.dispose();
    steps = t;
    return result;
  }

  async function getState(): Promise<TrainerState> {
    const moments: MomentState[] = [];
    for (const slot of slots) {
      moments.push({
        name: slot.name,
        shape: slot.m.shape.slice(),
        m: Float32Array.from((await slot.m.data()) as Float32Array),
        v: Float32Array.from((await slot.v.data()) as Float32Array),
      });
    }
    return { step: steps, learningRate, beta1, beta2, epsilon, moments };
  }

  function setState(state: TrainerState): void {
    if (state.beta1 !== beta1 || state.beta2 !== beta2 || state.epsilon !== epsilon) {
      throw new RangeError('trainer.setState: the saved Adam settings differ from this trainer\'s');
    }
    if (state.moments.length !== slots.length) {
      throw new RangeError(`trainer.setState: the state has ${state.moments.length} weights, this network trains ${slots.length}`);
    }
    state.moments.forEach((saved, i) => {
      const slot = slots[i];
      const size = slot.m.size;
      if (saved.name !== slot.name || saved.m.length !== size || saved.v.length !== size) {
        throw new RangeError(`trainer.setState: saved weight ${saved.name} does not match ${slot.name}`);
      }
    });
    state.moments.forEach((saved, i) => {
      const slot = slots[i];
      tf.tidy(() => {
        slot.m.assign(tf.tensor(saved.m, slot.m.shape));
        slot.v.assign(tf.tensor(saved.v, slot.v.shape));
      });
    });
    steps = state.step;
    learningRate = state.learningRate;
  }

  return {
    step,
    get steps() {
      return steps;
    },
    get learningRate() {
      return learningRate;
    },
    set learningRate(value: number) {
      learningRate = value;
    },
    getState,
    setState,
    dispose() {
      for (const slot of slots) {
        slot.m.dispose();
        slot.v.dispose();
      }
    },
  };
}

/**
 * The network's input tensors for n pictures of h x w: the scaled L* alone, or with the backbone's
 * features beside it. Call inside tf.tidy.
 * @example
 * const x = networkInputs(toNetworkInput(L), 1, 384, 512, borrowed);
 */
export function networkInputs(input: Float32Array, n: number, h: number, w: number, borrowed?: BorrowedInputs): tf.Tensor4D | tf.Tensor4D[] {
  const lightness = tf.tensor4d(input, [n, h, w, 1]);
  if (!borrowed) return lightness;
  const C = BACKBONE_CHANNELS;
  return [
    lightness,
    tf.tensor4d(borrowed.features8, [n, h / 8, w / 8, C.local8]),
    tf.tensor4d(borrowed.features16, [n, h / 16, w / 16, C.local16]),
    tf.tensor4d(borrowed.scene, [n, h / 16, w / 16, C.global]),
  ];
}
