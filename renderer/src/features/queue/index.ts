export { default as QueueView } from './QueueView.svelte';
