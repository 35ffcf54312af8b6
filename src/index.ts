// The public API of kinhue: the commands as functions (restore, score, the review sheet, fit for train and
// tune), the model (load, save, predict), the in-memory colourisation and the colour conversions that
// scripts around them need, with their errors and types. Everything else is internal. Re-exports only.
export { VERSION } from './version.js';
export {
  ErrorCodes,
  InputError,
  isKinhueError,
  KinhueError,
  ModelError,
  UsageError,
  type ErrorCode,
  type KinhueErrorOptions,
} from './errors.js';
export { OutputOnInputError } from './files/index.js';
export {
  colouriseLightness,
  planRestore,
  restore,
  RESTORE_DEFAULTS,
  type ColouriseOptions,
  type FileFailure,
  type FormatChoice,
  type HintsNotUsed,
  type PlanAction,
  type PlannedFile,
  type ProvenanceRecord,
  type RestoreEvent,
  type RestoreOptions,
  type RestorePlan,
  type RestoreSettings,
  type RestoreSummary,
} from './batch/index.js';
export {
  formatScoreTable,
  makeSheet,
  score,
  scoreToJson,
  writeScoreFiles,
  type ScoreEvent,
  type ScoreOptions,
  type ScoreReport,
  type SheetOptions,
} from './report/index.js';
export { fit, type FitEvent, type FitOptions, type FitResult } from './training/index.js';
export {
  DEFAULT_MODEL_DIR,
  findFaces,
  initBackend,
  loadFaceFinder,
  loadModel,
  predict,
  saveModel,
  type BackendInfo,
  type Decoding,
  type FaceBox,
  type FaceFinder,
  type KinhueModel,
  type PredictOptions,
} from './model/index.js';
export { labToSrgb, srgbToLab, type LabPlanes } from './colour/index.js';
export { parseHints, writeStarterHints, type Hints } from './hints/index.js';
