import { csvBatches, csvStream } from '../server/src/services/csvFile';
for (let k = 0; k < 3; k++) {
let t = performance.now(); let n = 0;
for await (const r of csvBatches('/tmp/in200k.csv', ',')) n+=r.length;
console.log('fast', n, (performance.now() - t).toFixed(0), 'ms');
t = performance.now(); n = 0;
for await (const r of csvStream('/tmp/in200k.csv', ',') as AsyncIterable<string[]>) n++;
console.log('csv-parse', n, (performance.now() - t).toFixed(0), 'ms');
}
