#include "daemon/readiness.h"

#ifdef TALLYD_HAVE_SYSTEMD
#include <systemd/sd-daemon.h>
#endif

namespace tallyd::daemon {

#ifdef TALLYD_HAVE_SYSTEMD
void notify_ready() { sd_notify(0, "READY=1"); }
void notify_stopping() { sd_notify(0, "STOPPING=1"); }
#else
void notify_ready() {}
void notify_stopping() {}
#endif

}  // namespace tallyd::daemon
