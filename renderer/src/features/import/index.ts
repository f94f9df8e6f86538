export { default as ImportView } from './ImportView.svelte';
