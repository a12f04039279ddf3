#[test]
fn print_report() {
    let quick = std::env::var("FULL").is_err();
    let t = std::time::Instant::now();
    let r = tapmodes::bench::accuracy::accuracy_report(quick);
    println!("{r}\nelapsed {:?}", t.elapsed());
}
