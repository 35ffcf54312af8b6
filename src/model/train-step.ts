/**
 * One optimisation step at a time: targets, rebalanced cross-entropy and an Adam update (Kingma
 * & Ba 2015), with the optimiser's whole state readable and writable so that a run saved and
 * resumed continues bit-for-bit as if never stopped.
 */
import * as tf from '@tensorflow/tfjs';
import { BACKBONE_CHANNELS, type BorrowedInputs } from './backbone.js';
import { type AbBins, abBins } from './bins.js';
import { type BatchTargets, batchTargets, weightedCrossEntropy } from './loss.js';
import { NETWORK_INPUTS, OUTPUT_STRIDE, toNetworkInput } from './network.js';

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
  /** Names of the weights being trained (their names in the network), in the order of values() and applyGradients(). */
  readonly names: string[];
  /** Copies of the trained weights' current values. */
  values(): Float32Array[];
  /**
   * One Adam step with gradients computed elsewhere (worker threads), in `names` order; null leaves
   * a weight and its moments as they are, as step() does for a weight the loss does not reach.
   */
  applyGradients(grads: (Float32Array | null)[]): void;
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

  /** Adam's update of one weight from its gradient `g`, at step t (bias corrections given). Inside tf.tidy. */
  function adam(slot: Slot, g: tf.Tensor, correct1: number, correct2: number): void {
    const m = tf.add(tf.mul(slot.m, beta1), tf.mul(g, 1 - beta1));
    const v = tf.add(tf.mul(slot.v, beta2), tf.mul(tf.square(g), 1 - beta2));
    slot.m.assign(m);
    slot.v.assign(v);
    const update = tf.div(tf.div(m, correct1), tf.add(tf.sqrt(tf.div(v, correct2)), epsilon));
    slot.variable.assign(tf.sub(slot.variable, tf.mul(update, learningRate)));
  }

  function step(L: Float32Array, ab: Float32Array, n: number, h: number, w: number, borrowed?: BorrowedInputs): number {
    const targets = checkedTargets('trainer.step', L, ab, n, h, w, bins, options.classWeights);
    const t = steps + 1;
    const correct1 = 1 - Math.pow(beta1, t);
    const correct2 = 1 - Math.pow(beta2, t);
    const loss = tf.tidy(() => {
      const { value, grads } = tf.variableGrads(lossFunction(network, targets, q, L, n, h, w, borrowed), variables);
      for (const slot of slots) {
        const g = grads[slot.variable.name];
        if (g) adam(slot, g, correct1, correct2);
      }
      return value;
    });
    const result = loss.dataSync()[0];
    loss.dispose();
    steps = t;
    return result;
  }

  function applyGradients(grads: (Float32Array | null)[]): void {
    if (grads.length !== slots.length)
      throw new RangeError(`trainer.applyGradients: ${grads.length} gradients for ${slots.length} weights`);
    const t = steps + 1;
    const correct1 = 1 - Math.pow(beta1, t);
    const correct2 = 1 - Math.pow(beta2, t);
    tf.tidy(() => {
      slots.forEach((slot, i) => {
        const g = grads[i];
        if (!g) return;
        if (g.length !== slot.m.size)
          throw new RangeError(`trainer.applyGradients: ${g.length} values for ${slot.name}, expected ${slot.m.size}`);
        adam(slot, tf.tensor(g, slot.m.shape), correct1, correct2);
      });
    });
    steps = t;
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
      throw new RangeError("trainer.setState: the saved Adam settings differ from this trainer's");
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
    names: slots.map((slot) => slot.name),
    values: () => slots.map((slot) => Float32Array.from(slot.variable.dataSync() as Float32Array)),
    applyGradients,
    dispose() {
      for (const slot of slots) {
        slot.m.dispose();
        slot.v.dispose();
      }
    },
  };
}

/** Checks a batch's sizes and builds its targets (trainer.step and the gradients of a shard alike). */
function checkedTargets(
  where: string,
  L: Float32Array,
  ab: Float32Array,
  n: number,
  h: number,
  w: number,
  bins: AbBins,
  classWeights: Float32Array,
): BatchTargets {
  if (h % 16 !== 0 || w % 16 !== 0) throw new RangeError(`${where}: crops must be multiples of 16, got ${w} x ${h}`);
  if (L.length !== n * h * w) throw new RangeError(`${where}: L has ${L.length} values, expected ${n * h * w}`);
  return batchTargets(ab, n, h, w, OUTPUT_STRIDE, bins, classWeights);
}

/** The batch's loss as a function of the network's weights, for tf.variableGrads. Call inside tf.tidy. */
function lossFunction(
  network: tf.LayersModel,
  targets: BatchTargets,
  q: number,
  L: Float32Array,
  n: number,
  h: number,
  w: number,
  borrowed: BorrowedInputs | undefined,
): () => tf.Scalar {
  if (network.inputs.length !== (borrowed ? NETWORK_INPUTS.length : 1)) {
    throw new RangeError(
      `the network reads ${network.inputs.length === 1 ? 'L* alone' : "the backbone's features beside L*"}, but the batch ${borrowed ? 'carries' : 'lacks'} them`,
    );
  }
  const x = networkInputs(toNetworkInput(L), n, h, w, borrowed);
  const target = tf.tensor4d(targets.target, [n, targets.height, targets.width, q]);
  const weight = tf.tensor3d(targets.weight, [n, targets.height, targets.width]);
  return () => weightedCrossEntropy(network.apply(x, { training: true }) as tf.Tensor4D, target, weight);
}

/** A batch's loss and the gradient of each trained weight (null where the loss does not reach it). */
export interface BatchGradients {
  loss: number;
  grads: (Float32Array | null)[];
}

export interface GradientOptions {
  /** Rebalancing weight per bin, as the trainer's. */
  classWeights: Float32Array;
  /** The bins the network predicts; default abBins(). */
  bins?: AbBins;
  /** The weights to differentiate, by name (a Trainer's `names`). */
  names: string[];
}

/** The gradients of a network's loss, without an optimiser: what a training worker computes on its shard of a batch. */
export interface GradientComputer {
  /** The loss of the batch (a mean over its pixels) and its gradients, in `names` order. Arguments as Trainer.step's. */
  compute(L: Float32Array, ab: Float32Array, n: number, h: number, w: number, borrowed?: BorrowedInputs): BatchGradients;
  /** Sets the named weights (in `names` order) to the given values. */
  setValues(values: Float32Array[]): void;
}

/**
 * Gradients of the loss with respect to the named weights of `network`, computed as Trainer.step
 * computes them.
 * @example
 * const g = createGradientComputer(net, { classWeights, names: trainer.names });
 * const { loss, grads } = g.compute(L, ab, 8, 128, 128);
 */
export function createGradientComputer(network: tf.LayersModel, options: GradientOptions): GradientComputer {
  const bins = options.bins ?? abBins();
  const q = bins.count;
  if (options.classWeights.length !== q) {
    throw new RangeError(`createGradientComputer: ${options.classWeights.length} class weights for ${q} bins`);
  }
  const byName = new Map(network.weights.map((w) => [w.originalName, w]));
  const layerWeights = options.names.map((name) => {
    const weight = byName.get(name);
    if (!weight) throw new RangeError(`createGradientComputer: the network has no weight ${name}`);
    return weight;
  });
  // Exactly the named weights are differentiated (tf.variableGrads skips untrainable ones).
  const wanted = new Set(options.names);
  for (const weight of network.weights) weight.trainable = wanted.has(weight.originalName);
  const variables = layerWeights.map((w) => w.read() as tf.Variable);

  function compute(L: Float32Array, ab: Float32Array, n: number, h: number, w: number, borrowed?: BorrowedInputs): BatchGradients {
    const targets = checkedTargets('gradients', L, ab, n, h, w, bins, options.classWeights);
    const { value, grads } = tf.tidy(() => tf.variableGrads(lossFunction(network, targets, q, L, n, h, w, borrowed), variables));
    const result: BatchGradients = {
      loss: value.dataSync()[0]!,
      grads: variables.map((v) => (grads[v.name] ? (grads[v.name]!.dataSync() as Float32Array) : null)),
    };
    tf.dispose([value, ...Object.values(grads)]);
    return result;
  }

  function setValues(values: Float32Array[]): void {
    if (values.length !== variables.length) throw new RangeError(`setValues: ${values.length} values for ${variables.length} weights`);
    tf.tidy(() => variables.forEach((v, i) => v.assign(tf.tensor(values[i]!, v.shape))));
  }

  return { compute, setValues };
}

/**
 * The network's input tensors for n pictures of h x w: the scaled L* alone, or with the backbone's
 * features beside it. Call inside tf.tidy.
 * @example
 * const x = networkInputs(toNetworkInput(L), 1, 384, 512, borrowed);
 */
export function networkInputs(
  input: Float32Array,
  n: number,
  h: number,
  w: number,
  borrowed?: BorrowedInputs,
): tf.Tensor4D | tf.Tensor4D[] {
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
