/** The one application window: isolated, sandboxed, no Node, loading only app://. */
import { BrowserWindow, type BrowserWindowConstructorOptions } from 'electron';
import { APP_INDEX_URL } from './security.js';

export function mainWindowOptions(preloadPath: string, devTools: boolean): BrowserWindowConstructorOptions {
  return {
    width: 1320,
    height: 860,
    minWidth: 960,
    minHeight: 620,
    show: false,
    title: 'Plateau',
    backgroundColor: '#ffffff',
    webPreferences: {
      preload: preloadPath,
      contextIsolation: true,
      sandbox: true,
      nodeIntegration: false,
      nodeIntegrationInWorker: false,
      nodeIntegrationInSubFrames: false,
      webSecurity: true,
      allowRunningInsecureContent: false,
      webviewTag: false,
      experimentalFeatures: false,
      navigateOnDragDrop: false,
      safeDialogs: true,
      spellcheck: false,
      devTools,
    },
  };
}

export function createMainWindow(preloadPath: string, devTools: boolean): BrowserWindow {
  const window = new BrowserWindow(mainWindowOptions(preloadPath, devTools));
  window.once('ready-to-show', () => window.show());
  void window.loadURL(APP_INDEX_URL);
  return window;
}
