/**
 * Shapes of the answers the views read from the bridge. The main side validates and owns them
 * (main/protocol); here only what the screens use, so a missing field shows as a dash.
 */
export interface AppInfo {
  appVersion: string;
  engineVersion: string;
  host: 'electron' | 'web';
  caution: { title: string; text: string };
  cautionAcknowledged: boolean;
  projectPath?: string;
}

export interface DatasetSummary {
  id: string;
  name: string;
  subjects: number;
  doses: number;
  levels: number;
  censored: number;
  hash?: string;
  addedAt?: string;
}

export interface FitSummary {
  id: string;
  name: string;
  datasetId: string;
  modelId: string;
  seeds?: number[];
  createdAt?: string;
  minus2LL?: number | null;
  verdict?: string;
}

export interface ProjectSummary {
  name: string;
  path: string;
  schemaVersion?: number;
  datasets: DatasetSummary[];
  models: Array<{ id: string; name: string; structure: string }>;
  fits: FitSummary[];
  dosingSessions: Array<{ id: string; patientId: string; createdAt: string }>;
}
