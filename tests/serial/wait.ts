// Polls a condition; the deadline only keeps a broken test from hanging, it asserts nothing about speed.
export async function until(condition: () => boolean, what: string, deadlineMs = 10_000): Promise<void> {
  const start = Date.now();
  while (!condition()) {
    if (Date.now() - start > deadlineMs) throw new Error(`gave up waiting for ${what}`);
    await new Promise((resolve) => setTimeout(resolve, 5));
  }
}
