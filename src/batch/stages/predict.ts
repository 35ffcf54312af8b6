/**
 * Stage 3, predict: the model runs on working-size L* (predicting at a quarter of it) and its colour is
 * brought up to the working size, edge-aware, guided by that L*.
 */
import { bilateralUpsample, shrinkPlane, type WorkingColour } from '../../colour/index.js';
import { predict, type Decoding, type KinhueModel, type Prediction } from '../../model/index.js';

export interface PredictSettings {
  /** How colour is chosen from the prediction. Default: the model's. */
  decoding?: Decoding;
  /** Annealed-mean temperature. Default: the model's. */
  temperature?: number;
  /** How much class rebalancing least-CIEDE2000 decoding leaves in. Default: the model's. */
  vividness?: number;
}

/** The working colour, with the decoder's features at the model's output cells when asked for (the colour memory reads them). */
export type PredictedColour = WorkingColour & { features?: NonNullable<Prediction['features']> };

/** Bilateral grid settings from the model's quarter size to the working size. */
export const TO_WORKING_SIZE = { rangeStep: 4 };

/**
 * The model's colour for working-size L*, at the working size.
 * @example
 *   const colour = await predictColour(L, 512, 384, model);
 */
export async function predictColour(
  L: Float32Array,
  width: number,
  height: number,
  model: KinhueModel,
  settings: PredictSettings & { features?: boolean } = {},
): Promise<PredictedColour> {
  const { decoding, temperature, vividness } = settings;
  const p = await predict(model, L, width, height, { decoding, temperature, vividness, cellFeatures: settings.features });
  const guide = shrinkPlane(L, width, height, p.width, p.height);
  const { a, b } = bilateralUpsample(guide, p.a, p.b, p.width, p.height, L, width, height, {
    ...TO_WORKING_SIZE,
    weights: p.confidence,
  });
  const colour = { width, height, L, a, b, confidence: p.confidence, confidenceWidth: p.width, confidenceHeight: p.height };
  return p.features ? { ...colour, features: p.features } : colour;
}
