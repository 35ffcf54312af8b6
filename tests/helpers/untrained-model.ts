import { createNetwork, initBackend, saveModel } from '../../src/model/index.js';

/**
 * Saves a small, real, untrained network as a kinhue model folder. Restore's invariants (L* kept,
 * files written, resume) do not depend on colour quality, so tests use this instead of the shipped model.
 */
export async function saveUntrainedModel(dir: string, name = 'test-untrained', seed = 3): Promise<void> {
  await initBackend();
  const network = createNetwork({ width: 4, seed });
  try {
    await saveModel(network, dir, { name });
  } finally {
    network.dispose();
  }
}
