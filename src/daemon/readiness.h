// Telling a service manager how the service is doing. With libsystemd (built
// with TALLYD_HAVE_SYSTEMD) this is sd_notify(3): "READY=1" once every source
// is bound and the first checkpoint written, "STOPPING=1" when shutting down.
// Without it, or when not started by systemd (no NOTIFY_SOCKET), nothing happens.
#pragma once

namespace tallyd::daemon {

void notify_ready();
void notify_stopping();

}  // namespace tallyd::daemon
