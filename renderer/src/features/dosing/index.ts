export { default as DosingView } from './DosingView.svelte';
