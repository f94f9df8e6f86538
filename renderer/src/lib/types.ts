/** The bridge's value types (main/protocol/bridge.ts owns them), re-exported for the views. */
export type {
  AppInfo,
  CatalogueEntry,
  DatasetSummary,
  FitSummary,
  FitValue,
  FitRecordValue,
  ImportPreview,
  LiteratureModel,
  ProjectSummary,
  QueueJob,
  QueueSnapshot,
  SavedModel,
  TargetPreset,
  TemplateSummary,
  ProgressEvent,
} from '../../../main/protocol/bridge.js';
