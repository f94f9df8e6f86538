/**
 * Where the app's parts are, given once by the host at start (an asar package moves them):
 * the built renderer, the compiled worker entries, the bundled resources.
 */
import * as path from 'node:path';

export interface AppPaths {
  /** Folder of the app: the repository root in development, app.asar when packaged. */
  appRoot: string;
  /** The built renderer (index.html). */
  rendererDir: string;
  /** Compiled main-process code (dist/main), where the worker entries live. */
  mainDir: string;
  /** Compiled engine (dist/engine): the files the verification report fingerprints. */
  engineDir: string;
  /** resources/ (demo project, models, targets, cautions). */
  resourcesDir: string;
}

export function appPathsFromRoot(appRoot: string, overrides: Partial<AppPaths> = {}): AppPaths {
  return {
    appRoot,
    rendererDir: overrides.rendererDir ?? path.join(appRoot, 'dist', 'renderer'),
    mainDir: overrides.mainDir ?? path.join(appRoot, 'dist', 'main'),
    engineDir: overrides.engineDir ?? path.join(appRoot, 'dist', 'engine'),
    resourcesDir: overrides.resourcesDir ?? path.join(appRoot, 'resources'),
  };
}
