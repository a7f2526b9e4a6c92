// Reading a checkpoint file without holding all of it (internal to
// checkpoint/; checkpoint::read_file is this with 1 MiB pieces).
//
// Why: a restore's cost on the build machine's VM is mostly first touches of
// fresh memory (~2 ms per MiB once the host has taken freed memory back,
// docs/benchmarks.md "Restart, sixth pass"); the file's bytes were 142 MiB of
// it at 100,000 series, read only to be decoded once.
//
// Contract: the same outcome as checkpoint::decode of the whole file, with
// the same error messages: a format-5 file is read a piece at a time, its
// head checked against its checksum before anything is decoded and its body
// decoded as it is read, its checksum computed on the way; an engine whose
// body then fails its checksum (or whose file does not end with the end
// line) is discarded, so nothing is restored unless the whole file checks
// out. Whatever does not fit that path (format 4, other first lines, a
// damaged or cut front, a size that does not add up) is read whole and
// handed to checkpoint::decode. Reading uses buffers of about `piece` bytes.
#pragma once

#include <cstddef>
#include <optional>
#include <string>

#include "checkpoint/checkpoint.h"

namespace tallyd::checkpoint {

Result<std::optional<Restored>> read_file_in_pieces(const std::string& path, const SettingsTable& settings,
                                                    EngineLimits limits, detect::FdrSpec fdr, std::size_t piece);

}  // namespace tallyd::checkpoint
