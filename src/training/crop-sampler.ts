/**
 * Batches of random crops: photos are visited in a shuffled order (reshuffled every pass), and each
 * gives one square crop at a random scale and position, mirrored half of the time. All choices come
 * from the run's {@link Random}, and the visiting order is part of the checkpoint.
 */
import { type BackboneFeatures, type BorrowedInputs, borrowedInputs, BACKBONE_CHANNELS } from '../model/index.js';
import type { Photo } from './photo-set.js';
import type { Random } from './random.js';
import { sampleCrop, type CropWindow } from '../colour/index.js';

/** Where the sampler stands in its visiting order: saved in checkpoints. */
export interface SamplerState {
  order: number[];
  position: number;
  /** Completed passes over the training photos. */
  epoch: number;
}

/** A batch of crops: L* planes `[n, size, size]` and, per crop, its a* plane then its b* plane `[n, 2, size, size]`. */
export interface CropBatch {
  n: number;
  size: number;
  L: Float32Array;
  ab: Float32Array;
  /** The backbone's features placed under each crop, when the sampler was given them. */
  borrowed?: BorrowedInputs;
}

/** A photo's backbone features, of the photo as it is and mirrored. */
export interface PhotoFeatures {
  plain: BackboneFeatures;
  mirrored: BackboneFeatures;
}

/** What crops are cut from: a photo's size and CIELAB planes. */
export type PhotoPlanes = Pick<Photo, 'width' | 'height' | 'L' | 'a' | 'b'>;

/** One crop of a batch, as drawn: the photo (its index in the sampler's list) and the window cut from it. */
export interface CropDraw {
  photo: number;
  window: CropWindow;
}

/** The largest zoom-out of a crop: its window is at most this many times the crop side. */
export const MAX_CROP_ZOOM = 2;

/**
 * Draws crops from a fixed list of photos.
 * @example
 *   const sampler = new CropSampler(set.train, rng);
 *   const batch = sampler.next(16, 128);
 */
export class CropSampler {
  private state: SamplerState;

  constructor(
    private readonly photos: PhotoPlanes[],
    private readonly rng: Random,
    state?: SamplerState,
    /** Per photo (same order), its backbone features; crops then carry them. */
    private readonly features?: PhotoFeatures[],
  ) {
    if (photos.length === 0) throw new RangeError('CropSampler needs at least one photo');
    this.state = state ? { order: [...state.order], position: state.position, epoch: state.epoch } : { order: [], position: 0, epoch: -1 };
  }

  /** The next batch of `n` crops of `size` x `size`. */
  next(n: number, size: number): CropBatch {
    return cutCrops(this.photos, this.features, this.draw(n, size), size);
  }

  /**
   * Where the next `n` crops of `size` x `size` come from, without cutting them: the random choices of
   * next(), in the same order, for threads that cut the crops themselves (cutCrops).
   */
  draw(n: number, size: number): CropDraw[] {
    return Array.from({ length: n }, () => {
      const photo = this.nextIndex();
      return { photo, window: this.window(this.photos[photo]!, size) };
    });
  }

  /** A copy of the sampler's position, for a checkpoint. */
  getState(): SamplerState {
    return { order: [...this.state.order], position: this.state.position, epoch: this.state.epoch };
  }

  private nextIndex(): number {
    if (this.state.position >= this.state.order.length) {
      this.state.order = this.rng.shuffle(this.photos.map((_, i) => i));
      this.state.position = 0;
      this.state.epoch++;
    }
    return this.state.order[this.state.position++]!;
  }

  /** A random square window: zoomed out by 1 to {@link MAX_CROP_ZOOM} where the photo allows. */
  private window(photo: PhotoPlanes, size: number): CropWindow {
    const shortSide = Math.min(photo.width, photo.height);
    const most = Math.min(size * MAX_CROP_ZOOM, shortSide);
    const least = Math.min(size, most);
    const side = this.rng.uniform(least, most);
    const x = this.rng.uniform(0, photo.width - side);
    const y = this.rng.uniform(0, photo.height - side);
    const flip = this.rng.next() < 0.5;
    return { x, y, side, flip };
  }
}

/**
 * Cuts the drawn crops of `size` x `size` from `photos` (and places their backbone features, when
 * given), into `into` when it has room for exactly these crops, else into new arrays.
 * @example
 *   const batch = cutCrops(set.train, features, sampler.draw(16, 128), 128);
 */
export function cutCrops(
  photos: readonly PhotoPlanes[],
  features: readonly PhotoFeatures[] | undefined,
  draws: readonly CropDraw[],
  size: number,
  into?: CropBatch,
): CropBatch {
  if (features && size % 16 !== 0)
    throw new RangeError(`crops of ${size} pixels cannot carry the backbone's features: use a multiple of 16`);
  const n = draws.length;
  const plane = size * size;
  const fits = into !== undefined && into.n === n && into.size === size && Boolean(into.borrowed) === Boolean(features);
  const L = fits ? into.L : new Float32Array(n * plane);
  const ab = fits ? into.ab : new Float32Array(n * plane * 2);
  const cells8 = (size / 8) ** 2;
  const cells16 = (size / 16) ** 2;
  const borrowed =
    features &&
    (fits
      ? into.borrowed
      : {
          features8: new Float32Array(n * cells8 * BACKBONE_CHANNELS.local8),
          features16: new Float32Array(n * cells16 * BACKBONE_CHANNELS.local16),
          scene: new Float32Array(n * cells16 * BACKBONE_CHANNELS.global),
        });
  draws.forEach(({ photo: index, window }, i) => {
    const photo = photos[index]!;
    sampleCrop(photo.L, photo.width, photo.height, window, size, L, i * plane);
    sampleCrop(photo.a, photo.width, photo.height, window, size, ab, i * plane * 2);
    sampleCrop(photo.b, photo.width, photo.height, window, size, ab, i * plane * 2 + plane);
    if (borrowed) {
      // A mirrored crop reads the mirrored photo's features, at the mirrored place.
      const f = features![index]!;
      const x = window.flip ? photo.width - window.x - window.side : window.x;
      const place = {
        x: x / photo.width,
        y: window.y / photo.height,
        width: window.side / photo.width,
        height: window.side / photo.height,
      };
      borrowedInputs(window.flip ? f.mirrored : f.plain, place, size, size, borrowed, i);
    }
  });
  return { n, size, L, ab, ...(borrowed ? { borrowed } : {}) };
}
