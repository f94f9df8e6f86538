/** The engine's version, written into every fit result and audit entry. */
export const ENGINE_VERSION = '0.1.0';
