/**
 * The one fake of the `electron` module, at its boundary only (Electron's own objects; none of
 * ours): each test file does
 *   vi.mock('electron', () => import('./fakeElectron.js'));
 * and inspects what our code registered (handlers, options, menus) through `fake`.
 * Behaviour is the documented one where our code depends on it (event emitters, handler
 * registration, whenReady); anything else records its call.
 */
import { EventEmitter } from 'node:events';

type Handler = (...args: any[]) => any;

export class FakeEvent {
  defaultPrevented = false;
  preventDefault() {
    this.defaultPrevented = true;
  }
}

export class FakeWebFrame {
  constructor(
    public url: string,
    public parent: FakeWebFrame | null = null,
  ) {}
}

let nextContentsId = 1;
export class FakeWebContents extends EventEmitter {
  readonly id = nextContentsId++;
  mainFrame = new FakeWebFrame('app://plateau/index.html');
  windowOpenHandler: Handler | undefined;
  sent: { channel: string; message: unknown }[] = [];
  destroyed = false;
  setWindowOpenHandler(handler: Handler) {
    this.windowOpenHandler = handler;
  }
  send(channel: string, message: unknown) {
    this.sent.push({ channel, message });
  }
  isDestroyed() {
    return this.destroyed;
  }
  async printToPDF() {
    return Buffer.from('%PDF-fake');
  }
}

export class BrowserWindow extends EventEmitter {
  static instances: BrowserWindow[] = [];
  webContents = new FakeWebContents();
  loadedUrl: string | undefined;
  shown = false;
  destroyed = false;
  constructor(public options: Record<string, any>) {
    super();
    BrowserWindow.instances.push(this);
  }
  loadURL(url: string) {
    this.loadedUrl = url;
    return Promise.resolve();
  }
  show() {
    this.shown = true;
  }
  isMinimized() {
    return false;
  }
  restore() {}
  focus() {}
  destroy() {
    this.destroyed = true;
  }
}

export class FakeSession extends EventEmitter {
  permissionRequestHandler: Handler | undefined;
  permissionCheckHandler: Handler | undefined;
  devicePermissionHandler: Handler | undefined;
  beforeRequest: Handler | undefined;
  headersReceived: Handler | undefined;
  protocolHandlers = new Map<string, Handler>();
  webRequest = {
    onBeforeRequest: (handler: Handler) => {
      this.beforeRequest = handler;
    },
    onHeadersReceived: (handler: Handler) => {
      this.headersReceived = handler;
    },
  };
  protocol = {
    handle: (scheme: string, handler: Handler) => {
      this.protocolHandlers.set(scheme, handler);
    },
  };
  setPermissionRequestHandler(handler: Handler) {
    this.permissionRequestHandler = handler;
  }
  setPermissionCheckHandler(handler: Handler) {
    this.permissionCheckHandler = handler;
  }
  setDevicePermissionHandler(handler: Handler) {
    this.devicePermissionHandler = handler;
  }
}

const partitions = new Map<string, FakeSession>();
export const session = {
  defaultSession: new FakeSession(),
  fromPartition(name: string) {
    let s = partitions.get(name);
    if (!s) partitions.set(name, (s = new FakeSession()));
    return s;
  },
};

class FakeApp extends EventEmitter {
  singleInstance = true;
  quitCalls = 0;
  exitCode: number | undefined;
  sandboxEnabled = false;
  isPackaged = false;
  appPath = '/nonexistent-app';
  paths: Record<string, string> = { documents: '/nonexistent-documents' };
  private resolveReady!: () => void;
  private readyPromise = new Promise<void>((r) => (this.resolveReady = r));
  requestSingleInstanceLock() {
    return this.singleInstance;
  }
  quit() {
    this.quitCalls++;
  }
  exit(code: number) {
    this.exitCode = code;
  }
  enableSandbox() {
    this.sandboxEnabled = true;
  }
  whenReady() {
    return this.readyPromise;
  }
  /** Test control: Electron became ready. */
  fireReady() {
    this.resolveReady();
  }
  getAppPath() {
    return this.appPath;
  }
  getPath(name: string) {
    return this.paths[name] ?? `/nonexistent-${name}`;
  }
  getVersion() {
    return '0.0.0-test';
  }
}
export const app = new FakeApp();

export const protocol = {
  privileged: [] as unknown[],
  registerSchemesAsPrivileged(list: unknown[]) {
    this.privileged.push(...list);
  },
};

export const ipcMain = {
  handlers: new Map<string, Handler>(),
  handle(channel: string, handler: Handler) {
    if (this.handlers.has(channel)) throw new Error(`Attempted to register a second handler for '${channel}'`);
    this.handlers.set(channel, handler);
  },
  removeHandler(channel: string) {
    this.handlers.delete(channel);
  },
};

export const Menu = {
  current: undefined as { template: any[] } | undefined,
  buildFromTemplate(template: any[]) {
    return { template };
  },
  setApplicationMenu(menu: { template: any[] }) {
    this.current = menu;
  },
};

export const dialog = {
  openResult: { canceled: true, filePaths: [] as string[] },
  saveResult: { canceled: true, filePath: '' },
  async showOpenDialog(..._args: unknown[]) {
    return this.openResult;
  },
  async showSaveDialog(..._args: unknown[]) {
    return this.saveResult;
  },
};

export const utilityProcess = {
  forks: [] as { modulePath: string; args: string[]; options: unknown }[],
  children: [] as EventEmitter[],
  fork(modulePath: string, args: string[], options: unknown) {
    this.forks.push({ modulePath, args, options });
    const child = Object.assign(new EventEmitter(), { stderr: null, postMessage() {}, kill() {} });
    this.children.push(child);
    return child;
  },
};

export const ipcRenderer = Object.assign(new EventEmitter(), {
  invoked: [] as { channel: string; payload: unknown }[],
  async invoke(channel: string, payload: unknown) {
    ipcRenderer.invoked.push({ channel, payload });
    return { ok: true, value: { channel } };
  },
});

export const contextBridge = {
  exposed: new Map<string, unknown>(),
  exposeInMainWorld(key: string, api: unknown) {
    this.exposed.set(key, api);
  },
  // In the test there is one world: run the function here, as Electron runs it in the page.
  executeInMainWorld(script: { func: Handler; args?: unknown[] }) {
    return script.func(...(script.args ?? []));
  },
};

export default { app, BrowserWindow, session, protocol, ipcMain, Menu, dialog, utilityProcess, ipcRenderer, contextBridge };
