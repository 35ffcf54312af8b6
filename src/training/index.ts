// Training: photo sets, crops, the fit loop, worker threads, checkpoints and resume. Re-exports only.
export * from './random.js';
export * from './photo-set.js';
export * from './crop-sampler.js';
export * from './evaluation.js';
export * from './checkpoint.js';
export * from './training-log.js';
export * from './fit-options.js';
export * from './fit.js';
export * from './weight-average.js';
export * from './parallel-trainer.js';
export * from './gradient-protocol.js';
