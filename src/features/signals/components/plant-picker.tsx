import type { PlantSummary } from '../../../../shared/contracts/plant-api.ts';
import { Select } from '../../../components/ui/controls.tsx';

/** Plant choice for a plant view; shown only when the caller may see more than one plant. */
export function PlantPicker({ plants, plantId, onChange }: { plants: PlantSummary[]; plantId: number | null; onChange(id: number): void }) {
  if (plants.length < 2) return null;
  return (
    <label className="flex items-center gap-1 text-[12px] text-ink-2">
      Plant
      <Select value={plantId ?? ''} onChange={(e) => onChange(Number(e.target.value))}>
        {plants.map((p) => (
          <option key={p.id} value={p.id}>
            {p.name}
          </option>
        ))}
      </Select>
    </label>
  );
}
