// The map on disk, in one include: tile files (tile_store.h) and the catalog (catalog.h).
//
//   MAPDIR/catalog.sqlite                 model, tile list with SHA-256s, map version, global index
//   MAPDIR/tiles/Z/X/Y-vN.sqlite          one tile, version N (self-contained: copy it and it
//                                         serves)
//
// Every writer goes PATH.tmp, fsync, rename through an Env (indexer/base/env.h), so a reader sees
// a whole file or none, and tests can inject faults. Schemas: DEVELOPERS.md "Map format".
#pragma once

#include "indexer/map/catalog.h"
#include "indexer/map/tile_store.h"
