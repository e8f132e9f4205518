package causal
import ("testing";"context";"fmt";"syscall";"time")
func cpuNow() time.Duration { var r syscall.Rusage; syscall.Getrusage(syscall.RUSAGE_SELF, &r); return time.Duration(r.Utime.Nano()+r.Stime.Nano()) }
func TestScratchCPU(t *testing.T){
	f, names := effectFrame(100000, 10, 11)
	sc := FromSource(f).Treat("t").Outcome("y").Adjust(names...).Propensity()
	c0 := cpuNow(); w0 := time.Now()
	sc.Bootstrap(context.Background(), AIPW, ATE, BootstrapOptions{Replicates: 200, Seed: 1})
	fmt.Printf("cpu %v/rep wall %v/rep\n", (cpuNow()-c0)/200, time.Since(w0)/200)
}
