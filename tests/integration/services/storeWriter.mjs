// Child for the project store kill test: opens the project and saves project.json in a loop
// (a new name each time) until it is killed. Argument: project folder, dist root.
const [dir, dist] = process.argv.slice(2);
const { ProjectStore } = await import(`${dist}/main/services/projectStore.js`);
const store = await ProjectStore.open(dir);
process.send?.('ready');
for (let i = 1; ; i++) await store.rename(`name ${i} ${'x'.repeat(i % 150)}`);
