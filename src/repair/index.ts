// The repair module: synthetic damage, the classical detector, mask-only replacement, whole-scan repair, figures.
export * from './damage.js';
export * from './morphology.js';
export * from './detector.js';
export * from './fill.js';
export * from './measures.js';
export * from './scan-repair.js';
export * from './network.js';
export * from './repair-model.js';
export * from './repair-training.js';
export * from './network-repair.js';
