// buoy_connector: the buoy source as a connector process, which weir starts
// and talks to over gRPC (`weir certify --suite quick --connector
// build/buoy_connector`).
#include "buoy_source.h"
#include "weir/adapter/serve.h"

int main() {
  buoys::BuoySource source;
  return weir::adapter::Serve(source);
}
