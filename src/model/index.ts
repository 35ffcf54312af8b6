// The colour model: backends and kernels, a*b* bins and encodings, the network, training steps,
// save/load, prediction, and the ONNX exports with the runtime that runs them. Re-exports only.
export * from './backend.js';
export * from './wasm-kernels.js';
export * from './bins.js';
export * from './encoding.js';
export * from './decoding.js';
export * from './network.js';
export * from './loss.js';
export * from './train-step.js';
export * from './metadata.js';
export * from './storage.js';
export * from './predict.js';
export * from './cell-features.js';
export * from './colour-memory.js';
export * from './calibration.js';
export * from './backbone.js';
export * from './region-pooling.js';
export * from './face-finder.js';
export { readModelFiles, tidyModelFolder, type ModelFiles } from './folder.js';
export { networkToOnnx, OnnxExportError } from './onnx-network.js';
export { graphModelToOnnx, type GraphModelJson } from './onnx-graph.js';
export { onnxRuntimeVersion, OnnxSession } from './onnx-runtime.js';
