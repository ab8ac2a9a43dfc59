package store

import "testing"

// TestLocate checks where the keys file and the recovery folder are looked
// for. The XDG defaults ($HOME/.config, $HOME/.local/state) and "a variable
// set but empty counts as unset" are from the XDG Base Directory
// Specification 0.8; $STACKFIT_KEYS winning over both, and the temporary
// folder as the last resort, are stackfit's own (README, "Your own keys"
// and the recovery file).
func TestLocate(t *testing.T) {
	tests := []struct {
		name string
		env  map[string]string
		home string
		want Paths
	}{
		{"home only", nil, "/home/ann",
			Paths{Keys: "/home/ann/.config/stackfit/keys.yaml", State: "/home/ann/.local/state/stackfit"}},
		{"XDG folders", map[string]string{"XDG_CONFIG_HOME": "/cfg", "XDG_STATE_HOME": "/st"}, "/home/ann",
			Paths{Keys: "/cfg/stackfit/keys.yaml", State: "/st/stackfit"}},
		{"empty XDG variables count as unset", map[string]string{"XDG_CONFIG_HOME": "", "XDG_STATE_HOME": ""}, "/home/ann",
			Paths{Keys: "/home/ann/.config/stackfit/keys.yaml", State: "/home/ann/.local/state/stackfit"}},
		{"STACKFIT_KEYS wins", map[string]string{"STACKFIT_KEYS": "/x/keys.yaml", "XDG_CONFIG_HOME": "/cfg"}, "/home/ann",
			Paths{Keys: "/x/keys.yaml", State: "/home/ann/.local/state/stackfit"}},
		{"no home", nil, "",
			Paths{Keys: "", State: "/tmp/stackfit"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := Locate(func(k string) string { return tt.env[k] }, tt.home, "/tmp")
			if got != tt.want {
				t.Errorf("got %+v, want %+v", got, tt.want)
			}
		})
	}
}
