/**
 * Seeded pseudo-random numbers for the plant model and its instruments.
 *
 * mulberry32 (Tommy Ettinger's 32-bit generator, public domain) is small, fast and good enough
 * for process noise; it is not for cryptography. Independent streams are derived from one
 * seed with the splitmix32 finaliser so that adding an instrument does not shift the random
 * numbers the process model draws (and so a scenario replays identically).
 */

/** splitmix32 finaliser: mixes a 32-bit integer into a well-spread 32-bit integer. */
export function mix32(x: number): number {
  let z = (x + 0x9e3779b9) | 0;
  z = Math.imul(z ^ (z >>> 16), 0x85ebca6b);
  z = Math.imul(z ^ (z >>> 13), 0xc2b2ae35);
  return (z ^ (z >>> 16)) >>> 0;
}

/** Seed for an independent stream `name` of the master seed. */
export function streamSeed(seed: number, name: string): number {
  let h = mix32(seed >>> 0);
  for (let i = 0; i < name.length; i++) h = mix32(h ^ name.charCodeAt(i));
  return h;
}

export class Prng {
  private state: number;
  private spare: number | null = null;

  constructor(seed: number) {
    this.state = seed >>> 0;
  }

  /** Uniform in [0, 1). */
  next(): number {
    let t = (this.state = (this.state + 0x6d2b79f5) | 0);
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  }

  /** Standard normal by the Box–Muller transform (the second value is kept for the next call). */
  gaussian(): number {
    if (this.spare !== null) {
      const s = this.spare;
      this.spare = null;
      return s;
    }
    let u = this.next();
    while (u <= 0) u = this.next();
    const v = this.next();
    const r = Math.sqrt(-2 * Math.log(u));
    this.spare = r * Math.sin(2 * Math.PI * v);
    return r * Math.cos(2 * Math.PI * v);
  }

  /** Exponentially distributed with the given mean. */
  exponential(mean: number): number {
    let u = this.next();
    while (u <= 0) u = this.next();
    return -mean * Math.log(u);
  }
}
