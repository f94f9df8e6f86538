export { default as VerifyView } from './VerifyView.svelte';
