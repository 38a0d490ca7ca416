fn main() {
    let path = std::env::args().nth(1).unwrap();
    let out = tutti::qasm::read_file(std::path::Path::new(&path), &Default::default());
    print!("{}", out.render());
    if let Some(c) = out.circuit {
        print!("{c}");
    }
}
