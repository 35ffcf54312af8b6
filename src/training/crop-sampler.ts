/**
 * Batches of random crops: photos are visited in a shuffled order (reshuffled every pass), and each
 * gives one square crop at a random scale and position, mirrored half of the time. All choices come
 * from the run's {@link Random}, and the visiting order is part of the checkpoint.
 */
import type { Photo } from './photo-set.js';
import type { Random } from './random.js';
import { sampleCrop, type CropWindow } from './resample.js';

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
  ) {
    if (photos.length === 0) throw new RangeError('CropSampler needs at least one photo');
    this.state = state ? { order: [...state.order], position: state.position, epoch: state.epoch } : { order: [], position: 0, epoch: -1 };
  }

  /** The next batch of `n` crops of `size` x `size`. */
  next(n: number, size: number): CropBatch {
    const plane = size * size;
    const L = new Float32Array(n * plane);
    const ab = new Float32Array(n * plane * 2);
    for (let i = 0; i < n; i++) {
      const photo = this.photos[this.nextIndex()]!;
      const window = this.window(photo, size);
      sampleCrop(photo.L, photo.width, photo.height, window, size, L, i * plane);
      sampleCrop(photo.a, photo.width, photo.height, window, size, ab, i * plane * 2);
      sampleCrop(photo.b, photo.width, photo.height, window, size, ab, i * plane * 2 + plane);
    }
    return { n, size, L, ab };
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
