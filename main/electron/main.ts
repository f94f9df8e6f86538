/** Electron's entry (package.json "main"): the app as wired in app.ts. */
import { bootstrap } from './app.js';

bootstrap({ argv: process.argv });
