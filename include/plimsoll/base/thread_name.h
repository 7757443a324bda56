#pragma once
// Names the calling thread for operators (top -H, perf, gdb); Linux keeps 15 bytes of it.

namespace plimsoll {

// Best effort: a name the system refuses is ignored. Call from the thread itself.
void NameThisThread(const char* name);

}  // namespace plimsoll
