// Svelte compiler options for the renderer (read by the Vite plugin and svelte-check).
export default {
  compilerOptions: { runes: true },
};
