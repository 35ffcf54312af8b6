/**
 * The one source of randomness in training: sfc32 (Chris Doty-Humphrey's "small fast counting" generator,
 * from PractRand), seeded through splitmix32. Its whole state is four 32-bit words, so a checkpoint can
 * store it and a resumed run draws exactly the numbers the uninterrupted run would have drawn.
 */

/** The serialisable state of a {@link Random}: four unsigned 32-bit words. */
export type RandomState = [number, number, number, number];

/** A seeded pseudo-random generator with a state that can be saved and restored. */
export class Random {
  private a: number;
  private b: number;
  private c: number;
  private d: number;

  /**
   * @example
   *   const rng = new Random(1);
   *   const x = rng.next(); // in [0, 1)
   *   const saved = rng.getState();
   */
  constructor(seed: number | RandomState) {
    if (Array.isArray(seed)) {
      [this.a, this.b, this.c, this.d] = seed.map((v) => v >>> 0) as RandomState;
      return;
    }
    // splitmix32 spreads a small integer seed over the four words (common practice for seeding sfc32).
    let s = Math.floor(seed) >>> 0;
    const mix = (): number => {
      s = (s + 0x9e3779b9) >>> 0;
      let z = s;
      z = Math.imul(z ^ (z >>> 16), 0x21f0aaad);
      z = Math.imul(z ^ (z >>> 15), 0x735a2d97);
      return (z ^ (z >>> 15)) >>> 0;
    };
    this.a = mix();
    this.b = mix();
    this.c = mix();
    this.d = mix();
    // The generator's authors discard the first outputs after seeding.
    for (let i = 0; i < 12; i++) this.nextUint32();
  }

  /** The next unsigned 32-bit integer. */
  nextUint32(): number {
    const t = (((this.a + this.b) >>> 0) + this.d) >>> 0;
    this.d = (this.d + 1) >>> 0;
    this.a = this.b ^ (this.b >>> 9);
    this.b = (this.c + (this.c << 3)) >>> 0;
    this.c = ((this.c << 21) | (this.c >>> 11)) >>> 0;
    this.c = (this.c + t) >>> 0;
    return t;
  }

  /** A float in [0, 1) with 32 bits of randomness. */
  next(): number {
    return this.nextUint32() / 4294967296;
  }

  /** A float in [min, max). */
  uniform(min: number, max: number): number {
    return min + (max - min) * this.next();
  }

  /** An integer in [0, n). */
  int(n: number): number {
    if (!(n >= 1)) throw new RangeError(`Random.int needs n >= 1, got ${n}`);
    return Math.floor(this.next() * n);
  }

  /** A Fisher-Yates shuffle of `items`, in place; returns the same array. */
  shuffle<T>(items: T[]): T[] {
    for (let i = items.length - 1; i > 0; i--) {
      const j = this.int(i + 1);
      const t = items[i] as T;
      items[i] = items[j] as T;
      items[j] = t;
    }
    return items;
  }

  /** A copy of the state, for a checkpoint. */
  getState(): RandomState {
    return [this.a, this.b, this.c, this.d];
  }

  /** Restores a state from {@link getState}. */
  setState(state: RandomState): void {
    [this.a, this.b, this.c, this.d] = state.map((v) => v >>> 0) as RandomState;
  }
}
