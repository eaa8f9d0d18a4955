package datasets

import "testing"

// FuzzParseManifest: the manifest parser never panics; accepted manifests
// have classes, clips with labels in range, and consistent folds.
func FuzzParseManifest(f *testing.F) {
	f.Add([]byte("path,label,fold,group\na.wav,saw,0,s1\nb.wav,bird,1,s2\n"))
	f.Add([]byte("path,label,start,end,extra\na.wav,x,0,1.5,z\n"))
	f.Add([]byte("label,path\n\"q,uoted\",x\n"))
	f.Add([]byte("path,label,fold\na.wav,x,99999999999999999999\n"))
	f.Add([]byte(""))
	f.Fuzz(func(t *testing.T, data []byte) {
		c, err := ParseManifest("fuzz.csv", data, "/base", "")
		if err != nil {
			return
		}
		if len(c.Clips) == 0 || len(c.Classes) == 0 {
			t.Fatal("accepted an empty corpus")
		}
		for _, cl := range c.Clips {
			if cl.Label < 0 || cl.Label >= len(c.Classes) || (c.HasFolds && (cl.Fold < 0 || cl.Fold >= c.Folds)) {
				t.Fatalf("clip %+v out of range", cl)
			}
		}
	})
}

// FuzzDecodeCacheEntry: damaged cache entries are rejected, never panic.
func FuzzDecodeCacheEntry(f *testing.F) {
	f.Add([]byte("PIPITLM1\x01\x00\x00\x00\x01\x00\x00\x00\x00\x00\x80\x3f\x00\x00\x00\x00"))
	f.Add([]byte("PIPITLM1\xff\xff\xff\xff\xff\xff\xff\xff"))
	f.Fuzz(func(t *testing.T, data []byte) {
		m, b, fr, err := decodeCacheEntry(data)
		if err == nil && len(m) != b*fr {
			t.Fatal("inconsistent entry accepted")
		}
	})
}
