export default function WhatIfPage() {
  return <p className="p-2 text-ink-3">The what-if calculators load here.</p>;
}
