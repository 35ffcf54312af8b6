// The repair module: synthetic damage, the classical detector, mask-only replacement, whole-scan repair, figures.
export * from './damage.js';
export * from './morphology.js';
export * from './detector.js';
export * from './fill.js';
export * from './measures.js';
export * from './scan-repair.js';
