export { csvField, csvRow, type CsvValue } from './csv.js';
export { TextFileWriter, type TextFileWriterOptions } from './writer.js';
export {
  ASSIGNMENT_CSV_HEADER, assignmentCsvRow, assignmentLine, epochLine, expiryLine, openRejectsFile, openRunDir,
  rejectLine, RUN_FILES, type RunDirSink,
} from './run-dir.js';
export { buildManifest, pairflowVersion, type ManifestInput, type RunManifest } from './manifest.js';
export { checkOutputPath, stageDir, type StagedDir } from './staged-dir.js';
