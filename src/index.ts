export * from './errors.js';
export {
  loadLog, readLogFile, readLogBatches, validateEvent, parseRfc3339, formatReject, logFormatOf,
  EVENT_SCHEMA, toEventRecord, toJsonLine,
  type LogItem, type LogInput, type LogFormat, type LoadLogOptions, type ReadLogOptions, type EventRecord,
} from './consume/index.js';
export { generateEvents, generateDay, GEN_DEFAULTS, type GenOptions } from './replay/gen.js';
