package learn

import "tessera/patches/patchtest"

var sharedPath = patchtest.SharedPath
