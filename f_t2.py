import sys; sys.path.insert(0,"tests")
import numpy as np, dataclasses
from test_spectrogram import *
plan = plan_protocol(protocol_scenario())
size, hop, n_records = 128, 96, 400
spec = expected_spectrogram(plan, window_samples=size, hop_samples=hop)
w = taper("hann", size); w = w/np.sqrt(np.mean(w**2)); order=np.argsort(np.fft.fftfreq(size))
grams = np.empty((n_records,) + spec.density.shape)
for i in range(n_records):
    sink = MemorySink(dataclasses.replace(plan, seed=500 + i))
    run_segments(sink.plan, sink, chunk=1 << 12)
    z = (sink.counts[:, 0] + 1j * sink.counts[:, 1]) * plan.shot_noise_per_count
    frames = np.stack([z[s:s + size] * w for s in spec.starts])
    grams[i] = np.abs(np.fft.fft(frames, axis=1)[:, order]) ** 2 / (FS * size)
zs = (grams.mean(0)-spec.density)/(grams.std(0,ddof=1)/np.sqrt(n_records))
print(np.mean(zs**2), np.abs(zs).max(), np.unravel_index(np.abs(zs).argmax(), zs.shape))
print(np.mean(zs, axis=1))
print(np.mean(zs, axis=0)[np.argsort(-np.abs(np.mean(zs,axis=0)))[:8]], spec.frequency_hz[np.argsort(-np.abs(np.mean(zs,axis=0)))[:8]])
rel = grams.mean(0)/spec.density - 1
print(np.abs(rel).max())
