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
    private readonly photos: Photo[],
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
    const plane = size * size;
    const L = new Float32Array(n * plane);
    const ab = new Float32Array(n * plane * 2);
    const cells8 = (size / 8) ** 2;
    const cells16 = (size / 16) ** 2;
    const borrowed = this.features && {
      features8: new Float32Array(n * cells8 * BACKBONE_CHANNELS.local8),
      features16: new Float32Array(n * cells16 * BACKBONE_CHANNELS.local16),
      scene: new Float32Array(n * cells16 * BACKBONE_CHANNELS.global),
    };
    for (let i = 0; i < n; i++) {
      const index = this.nextIndex();
      const photo = this.photos[index]!;
      const window = this.window(photo, size);
      sampleCrop(photo.L, photo.width, photo.height, window, size, L, i * plane);
      sampleCrop(photo.a, photo.width, photo.height, window, size, ab, i * plane * 2);
      sampleCrop(photo.b, photo.width, photo.height, window, size, ab, i * plane * 2 + plane);
      if (borrowed) {
        // A mirrored crop reads the mirrored photo's features, at the mirrored place.
        const f = this.features![index]!;
        const x = window.flip ? photo.width - window.x - window.side : window.x;
        const place = {
          x: x / photo.width,
          y: window.y / photo.height,
          width: window.side / photo.width,
          height: window.side / photo.height,
        };
        borrowedInputs(window.flip ? f.mirrored : f.plain, place, size, size, borrowed, i);
      }
    }
    return { n, size, L, ab, ...(borrowed ? { borrowed } : {}) };
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
  private window(photo: Photo, size: number): CropWindow {
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
