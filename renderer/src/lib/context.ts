import { getContext, setContext } from 'svelte';
import type { AppState } from './app.svelte.js';

const KEY = Symbol('plateau-app');

export function setAppContext(app: AppState): void {
  setContext(KEY, app);
}

/** The app frame's state, for views that switch view or share selections. */
export function appContext(): AppState {
  const app = getContext<AppState | undefined>(KEY);
  if (!app) throw new Error('appContext() used outside the app frame');
  return app;
}
