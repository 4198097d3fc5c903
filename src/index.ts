export * from './errors.js';
export {
  loadLog, readLogFile, readLogBatches, validateEvent, parseRfc3339, formatReject, logFormatOf,
  EVENT_SCHEMA, toEventRecord, toJsonLine,
  type LogItem, type LogInput, type LogFormat, type LoadLogOptions, type ReadLogOptions, type EventRecord,
} from './consume/index.js';
export { generateEvents, generateDay, GEN_DEFAULTS, type GenOptions } from './gen/gen.js';
export {
  WindowEngine,
  type AssignmentRecord, type ExpiryRecord, type EpochRecord, type EngineSink, type EngineTotals, type EngineOptions,
  type PoolSnapshot, type SnapshotUnit,
} from './window/engine.js';
export { OccurrenceLedger, buildOccurrences, type Occurrence, type LedgerOutcome } from './window/occurrences.js';
export { EARTH_RADIUS_KM, haversineKm, euclideanKm, travelMin, capabilitiesAllow } from './window/geo.js';
export { SpatialGrid, cellKmFor, type GridOptions } from './window/grid.js';
