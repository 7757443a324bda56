#include "plimsoll/base/thread_name.h"

#include <pthread.h>

#include <cstring>
#include <string>

namespace plimsoll {

void NameThisThread(const char* name) {
  const std::string cut(name, strnlen(name, 15));
  pthread_setname_np(pthread_self(), cut.c_str());
}

}  // namespace plimsoll
