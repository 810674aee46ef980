// How the memory estimate (core/memory_estimate.hpp) is told to the user: the parts' names, the
// study keys that drive each part, and the refusal of a study whose estimated peak memory is
// above what this process may use (machine_memory.hpp). `check` and `plan` refuse through
// refuse_memory_beyond, before anything is written or allocated for the study.
//
// The refusal is an InputError at the key that drives the largest part: of the settings the part
// grows with (MemoryPart::drivers), the one of largest value that the study writes (in place, or
// as a sweep entry, e.g. sweep.replicates), at its line. When none is written (the defaults drive
// it), the largest is named at the line of its section, or at line 1. The message lists every
// driver with its value, largest first.
#pragma once
#include <optional>
#include <string>

#include "core/running/memory_estimate.hpp"
#include "io/input_error.hpp"
#include "io/machine_memory.hpp"

namespace dobudget::io {

// "datasets", "model fit", ..., "results kept until the tables are written".
std::string memory_part_name(MemoryPartId part);

// "1.5 GB", "320 MB", "12 kB" (decimal units).
std::string format_bytes(double bytes);

// Nothing when `estimate` fits in `available` (or available.bytes is 0: unknown); otherwise the
// refusal, located in the study text `yaml_text` of `study_file` (see above).
std::optional<InputError> memory_refusal(const MemoryEstimate& estimate, const MachineMemory& available,
                                         const std::string& study_file, const std::string& yaml_text);

// memory_refusal for the study file `study_file` (read again for the lines), thrown.
void refuse_memory_beyond(const MemoryEstimate& estimate, const MachineMemory& available,
                          const std::string& study_file);

}  // namespace dobudget::io
