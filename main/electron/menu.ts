/**
 * The application menu: the usual edit, view and window shortcuts (Electron roles), and Help >
 * Verify this installation, which asks the page to run the verification (channel verify.run).
 * Menu commands reach the page as the 'menu' event `{command}`.
 */
import { Menu, type MenuItemConstructorOptions } from 'electron';

export type MenuCommand = 'verify-installation' | 'about';

export function appMenuTemplate(options: { isMac: boolean; devTools: boolean; send: (command: MenuCommand) => void }): MenuItemConstructorOptions[] {
  const view: MenuItemConstructorOptions[] = [
    { role: 'resetZoom' },
    { role: 'zoomIn' },
    { role: 'zoomOut' },
    { type: 'separator' },
    { role: 'togglefullscreen' },
  ];
  if (options.devTools) view.push({ type: 'separator' }, { role: 'reload' }, { role: 'toggleDevTools' });
  const template: MenuItemConstructorOptions[] = [];
  if (options.isMac) template.push({ role: 'appMenu' });
  template.push(
    { label: 'File', submenu: [options.isMac ? { role: 'close' } : { role: 'quit' }] },
    { role: 'editMenu' },
    { label: 'View', submenu: view },
    { role: 'windowMenu' },
    {
      role: 'help',
      submenu: [
        { label: 'Verify this installation', click: () => options.send('verify-installation') },
        { label: 'About Plateau', click: () => options.send('about') },
      ],
    },
  );
  return template;
}

export function setAppMenu(template: MenuItemConstructorOptions[]): void {
  Menu.setApplicationMenu(Menu.buildFromTemplate(template));
}
