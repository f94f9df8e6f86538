export { default as ResultsView } from './ResultsView.svelte';
